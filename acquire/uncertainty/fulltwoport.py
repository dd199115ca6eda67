"""Uncertainty of the four corrected S-parameters after a full two-port calibration.

Measurement model: the exact 12-term model of ``acquire.calibration.twoport``, with the
cal set's solved terms taken as the analyzer's error box and the corrected device as the
truth at the point of evaluation. Each calibration is solved again from readings made
under that box, by the project's own solver (``acquire.calibration.solve``):

- port 1 and port 2: the open, short and load as read. Each standard's actual value
  deviates from its kit model within the budget (load: uniform over a disc of radius
  ``load_error``; open and short: phase ± ``phase_error_deg`` and relative magnitude
  ± ``magnitude_error``, rectangular), plus one reconnection (circular normal, RMS
  ``repeatability``) and one noise draw per reading. The standards at port 2 are taken
  as other units than those at port 1 (independent deviations; an assumption).
- the thru: defined thru (``two-port``): its kit model with ``thru_error`` on |S21|
  (rectangular); unknown thru (``two-port-unknown-thru``): the kit model is only the
  solver's estimate, and the switch terms the 12 terms imply (Marks 1997, inverted:
  Γf = (e22 − e22')/(e23e32' + e33'·(e22 − e22'))) are read too, with noise.
- optional isolation (loads on both ports): its two transmission readings, with noise.
- the device: reconnected at both ports, its four readings with noise, and drift.

A reconnection is a small error at the joint: a reflection δ (circular normal, RMS
``repeatability``) added to the reflection on its port and a relative error τ of the
same RMS on the transmissions through it (an assumption, as in ``transmission``; the
thru has one joint, the device two). Noise: the budget's RMS at the reference plane
times |reflection tracking| of the receiver that reads the wave (b1: S11m, S12m;
b2: S21m, S22m) in raw units; a switch term a2/b2 (a1/b1) gets that raw noise divided
by |S21m| (|S12m|) of the thru. Drift: circular normal added to each of the device's
four S-parameters.

Every input is a real or complex variable x_i with the distribution of ``inputs``; the
sensitivity of each corrected S-parameter to it is taken by central differences at
x = 0 (JCGM 100:2008, GUM, 5.1.3 note 2), batched over inputs and frequency. The model
is holomorphic in its complex inputs, so one complex sensitivity per input carries both
parts (the tests check it). The residual-error view of EURAMET cg-12 ("Guidelines on
the Evaluation of Vector Network Analysers", v3.0, 2018) is what this model gives to
first order. Each parameter's U then comes from ``propagate.reflection_from_contributions``:
U = 2u away from zero, the 95 % radius of the complex error near zero (a matched port,
or a transmission in a deep stop band). The load match is corrected by these methods, so
no bias remains.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from acquire.calibration.twoport import TWO_PORT_PARAMS, TwelveTerms, correct_twelve
from acquire.uncertainty.budget import Budget

STANDARDS = ("open", "short", "load")
KINDS = ("open", "short", "load", "thru")
DEFINED, UNKNOWN = "two-port", "two-port-unknown-thru"
METHODS = (DEFINED, UNKNOWN)
SWITCH = ("switch.forward", "switch.reverse")
_H = 1e-6
_CHUNK = 8  # inputs per batched model evaluation (memory: 2·_CHUNK·F points)


@dataclass(frozen=True)
class Input:
    """One input of the model: 'rect' (real, uniform on ±size), 'disc' (complex, uniform
    over the disc of radius size) or 'normal' (complex circular normal, standard
    deviation ``size`` for each of its real and imaginary parts)."""

    kind: str
    size: float


def inputs(budget: Budget, method: str, isolation: bool) -> dict[str, Input]:
    """The model's inputs with their distributions (budget module doc); inputs of size 0
    are left out (they cannot move anything)."""
    rep, noise = budget.repeatability / np.sqrt(2), 1.0 / np.sqrt(2)  # noise scaled later
    out: dict[str, Input] = {}
    for p in (1, 2):
        for k in ("open", "short"):
            out[f"p{p}.{k}.phase"] = Input("rect", float(np.radians(budget.phase_error_deg)))
            out[f"p{p}.{k}.mag"] = Input("rect", budget.magnitude_error)
        out[f"p{p}.load.dev"] = Input("disc", budget.load_error)
        for k in STANDARDS:
            out[f"p{p}.{k}.rep"] = Input("normal", rep)
            out[f"p{p}.{k}.noise"] = Input("normal", noise)
    if method == DEFINED:
        out["thru.mag"] = Input("rect", budget.thru_error)
    for name in ("thru.rep1", "thru.rep2", "thru.rept", "dut.rep1", "dut.rep2",
                 "dut.rept1", "dut.rept2"):
        out[name] = Input("normal", rep)
    for param in ("11", "21", "12", "22"):
        out[f"thru.noise{param}"] = Input("normal", noise)
        out[f"dut.noise{param}"] = Input("normal", noise)
        out[f"dut.drift{param}"] = Input("normal", budget.drift / np.sqrt(2))
    if method == UNKNOWN:
        out["switch.noisef"] = Input("normal", noise)
        out["switch.noiser"] = Input("normal", noise)
    if isolation:
        out["iso.noise21"] = Input("normal", noise)
        out["iso.noise12"] = Input("normal", noise)
    return {n: i for n, i in out.items() if i.size > 0}


@dataclass(frozen=True, eq=False)
class FullSetup:
    """What the model needs; every array has the setup's N points (F, or F tiled)."""

    method: str  # DEFINED or UNKNOWN
    kit: Any  # the CalKit the calibration used
    freq_hz: np.ndarray  # (N,)
    names: Mapping[str, str]  # kind (open, short, load, thru) -> the kit's standard name
    terms: TwelveTerms  # the error box
    device: np.ndarray  # (N, 2, 2) the device's S-parameters
    isolation: bool = False

    def tiled(self, n: int) -> FullSetup:
        """The same setup repeated ``n`` times along the frequency axis (the kit's models
        computed once on the setup's own grid and repeated)."""
        freq = np.tile(self.freq_hz, n)
        return replace(self, freq_hz=freq, kit=KnownGridKit.of(self.kit, self.freq_hz, n,
                                                               self.names),
                       terms=_tile_twelve(self.terms, n), device=np.tile(self.device, (n, 1, 1)))


class KnownGridKit:
    """A cal kit whose standards' models on one grid are already known: the same
    numbers, asked for once per model evaluation by the readings and by the solver."""

    def __init__(self, kit: Any, freq_hz: np.ndarray, reflection: Mapping[str, np.ndarray],
                 thru: Mapping[str, tuple[np.ndarray, np.ndarray]]) -> None:
        self.kit, self.freq_hz = kit, freq_hz
        self._reflection, self._thru = reflection, thru
        for a in (*reflection.values(), *(a for pair in thru.values() for a in pair)):
            a.flags.writeable = False  # shared by every evaluation: nobody may change them

    @classmethod
    def of(cls, kit: Any, freq_hz: np.ndarray, n: int, names: Mapping[str, str]
           ) -> KnownGridKit:
        """``kit``'s models of the named standards on ``freq_hz`` repeated ``n`` times."""
        kit = kit.kit if isinstance(kit, KnownGridKit) else kit
        refl = {names[k]: np.tile(kit.reflection(names[k], freq_hz), n) for k in STANDARDS}
        t11, t21 = kit.thru_s(names["thru"], freq_hz)
        return cls(kit, np.tile(freq_hz, n), refl, {names["thru"]: (np.tile(t11, n),
                                                                    np.tile(t21, n))})

    def _known(self, freq_hz: np.ndarray) -> bool:
        f = np.asarray(freq_hz)
        return f is self.freq_hz or (f.shape == self.freq_hz.shape
                                     and bool(np.array_equal(f, self.freq_hz)))

    def reflection(self, name: str, freq_hz: np.ndarray) -> np.ndarray:
        if name in self._reflection and self._known(freq_hz):
            return self._reflection[name]
        return self.kit.reflection(name, freq_hz)

    def thru_s(self, name: str, freq_hz: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        if name in self._thru and self._known(freq_hz):
            return self._thru[name]
        return self.kit.thru_s(name, freq_hz)

    def __getattr__(self, name: str) -> Any:
        return getattr(self.kit, name)


def _tile_terms(terms: Any, n: int) -> Any:
    return type(terms)(*(np.tile(a, n) for a in terms.as_dict().values()))


def _x(x: Mapping[str, Any], name: str) -> Any:
    return x.get(name, 0.0)


def switch_terms(terms: TwelveTerms) -> tuple[np.ndarray, np.ndarray]:
    """(Γf, Γr) implied by the 12 terms: the 8-term relation of Marks 1997 inverted."""
    p1, p2 = terms.port1, terms.port2
    df = terms.forward.load_match - p2.source_match
    dr = terms.reverse.load_match - p1.source_match
    return (df / (p2.reflection_tracking + p2.directivity * df),
            dr / (p1.reflection_tracking + p1.directivity * dr))


def _actual_standard(setup: FullSetup, kind: str, port: int, x: Mapping[str, Any]
                     ) -> np.ndarray:
    model = setup.kit.reflection(setup.names[kind], setup.freq_hz)
    if kind == "load":
        return model + _x(x, f"p{port}.load.dev")
    return model * (1 + _x(x, f"p{port}.{kind}.mag")) * np.exp(1j * _x(x, f"p{port}.{kind}.phase"))


def _thru_s(setup: FullSetup) -> np.ndarray:
    t11, t21 = setup.kit.thru_s(setup.names["thru"], setup.freq_hz)
    s = np.empty((setup.freq_hz.size, 2, 2), np.complex128)
    s[:, 0, 0] = s[:, 1, 1] = t11
    s[:, 1, 0] = s[:, 0, 1] = t21
    return s


def _joined(s: np.ndarray, x: Mapping[str, Any], who: str, joints: tuple[str, ...],
            drift: bool) -> np.ndarray:
    """A two-port as connected: reflection errors at its ports, relative transmission
    errors of its joints, drift (device only)."""
    out = np.array(s, np.complex128)
    out[:, 0, 0] += _x(x, f"{who}.rep1")
    out[:, 1, 1] += _x(x, f"{who}.rep2")
    scale = 1.0
    for j in joints:
        scale = scale * (1 + _x(x, f"{who}.{j}"))
    out[:, 1, 0] *= scale
    out[:, 0, 1] *= scale
    if drift:
        for i, j in ((0, 0), (1, 0), (0, 1), (1, 1)):
            out[:, i, j] += _x(x, f"{who}.drift{i + 1}{j + 1}")
    return out


def _with_noise(raw: np.ndarray, x: Mapping[str, Any], who: str, n1: np.ndarray,
                n2: np.ndarray) -> np.ndarray:
    raw = np.array(raw)
    raw[:, 0, 0] += n1 * _x(x, f"{who}.noise11")
    raw[:, 0, 1] += n1 * _x(x, f"{who}.noise12")
    raw[:, 1, 0] += n2 * _x(x, f"{who}.noise21")
    raw[:, 1, 1] += n2 * _x(x, f"{who}.noise22")
    return raw


def readings(setup: FullSetup, x: Mapping[str, Any], noise: np.ndarray
             ) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """(the calibration's raw readings keyed as a cal set keys them, the device's raw
    (N, 2, 2)) for input values ``x`` (arrays (N,) or scalars; missing inputs are 0);
    ``noise`` (N,) is the RMS trace noise at the reference plane."""
    t = setup.terms
    n1 = noise * np.abs(t.port1.reflection_tracking)  # receiver b1
    n2 = noise * np.abs(t.port2.reflection_tracking)  # receiver b2
    raw: dict[str, np.ndarray] = {}
    for p, box, rn, param in ((1, t.port1, n1, "S11"), (2, t.port2, n2, "S22")):
        for k in STANDARDS:
            actual = _actual_standard(setup, k, p, x) + _x(x, f"p{p}.{k}.rep")
            raw[f"{setup.names[k]}.{param}"] = box.embed(actual) + rn * _x(x, f"p{p}.{k}.noise")
    thru = _thru_s(setup)
    if setup.method == DEFINED:
        thru[:, 1, 0] *= 1 + _x(x, "thru.mag")
        thru[:, 0, 1] *= 1 + _x(x, "thru.mag")
    m = _with_noise(t.embed(_joined(thru, x, "thru", ("rept",), False)), x, "thru", n1, n2)
    for i, j in ((0, 0), (1, 0), (0, 1), (1, 1)):
        raw[f"{setup.names['thru']}.S{i + 1}{j + 1}"] = m[:, i, j]
    if setup.method == UNKNOWN:
        gf, gr = switch_terms(t)
        raw[SWITCH[0]] = gf + n2 * _x(x, "switch.noisef") / np.abs(m[:, 1, 0])
        raw[SWITCH[1]] = gr + n1 * _x(x, "switch.noiser") / np.abs(m[:, 0, 1])
    if setup.isolation:
        load = setup.names["load"]
        raw[f"{load}.S21"] = t.forward.isolation + n2 * _x(x, "iso.noise21")
        raw[f"{load}.S12"] = t.reverse.isolation + n1 * _x(x, "iso.noise12")
    dut = _joined(setup.device, x, "dut", ("rept1", "rept2"), True)
    return raw, _with_noise(t.embed(dut), x, "dut", n1, n2)


Calibrate = Callable[[FullSetup, Mapping[str, np.ndarray]], TwelveTerms]


def project_solver(setup: FullSetup, raw: Mapping[str, np.ndarray]) -> TwelveTerms:
    """The calibration solved as the project solves it (``acquire.calibration.solve``)."""
    from acquire.calibration.methods import solve

    iso = f"{setup.names['load']}.S21" if setup.isolation else None
    model = solve(setup.method, setup.freq_hz, raw, setup.kit,
                  standards=tuple(setup.names[k] for k in KINDS), isolation=iso).model
    terms = model.twelve_term
    assert terms is not None  # both two-port methods solve all twelve terms
    return terms


def corrected(setup: FullSetup, x: Mapping[str, Any], noise: np.ndarray,
              calibrate: Calibrate = project_solver) -> dict[str, np.ndarray]:
    """The four corrected S-parameters (N,) for input values ``x``: the calibration
    solved again from its readings, the device's readings corrected (``correct_twelve``)."""
    raw, dut = readings(setup, x, noise)
    return correct_twelve(calibrate(setup, raw), dut)


def sensitivities(setup: FullSetup, table: Mapping[str, Input], noise: np.ndarray
                  ) -> tuple[dict[str, np.ndarray], dict[str, dict[str, np.ndarray]]]:
    """(the corrected values at x = 0, {input: {param: ∂param/∂x (F,)}}), by central
    differences with step 1e-6, ``_CHUNK`` inputs per batched evaluation. The device's
    own inputs (``dut.*``) do not reach the calibration, so their chunks reuse the
    calibration solved at x = 0 (the same numbers, one solve fewer per chunk)."""
    size = setup.freq_hz.size
    noise = np.broadcast_to(np.asarray(noise, np.float64), (size,))
    raw, dut = readings(setup, {}, noise)
    solved = project_solver(setup, raw)
    centre = correct_twelve(solved, dut)
    names = sorted(table, key=_device_only)  # calibration inputs first, then the device's
    deriv: dict[str, dict[str, np.ndarray]] = {}
    for start in range(0, len(names), _CHUNK):
        chunk = names[start:start + _CHUNK]
        blocks = 2 * len(chunk)
        x = {}
        for i, name in enumerate(chunk):
            step = np.zeros((blocks, size), np.complex128)
            step[2 * i], step[2 * i + 1] = _H, -_H
            x[name] = step.reshape(-1)
        big = setup.tiled(blocks)
        raw, dut = readings(big, x, np.tile(noise, blocks))
        terms = (_tile_twelve(solved, blocks) if all(map(_device_only, chunk))
                 else project_solver(big, raw))
        out = {p: v.reshape(blocks, size) for p, v in correct_twelve(terms, dut).items()}
        for i, name in enumerate(chunk):
            deriv[name] = {p: (out[p][2 * i] - out[p][2 * i + 1]) / (2 * _H)
                           for p in TWO_PORT_PARAMS}
    return centre, deriv


def _device_only(name: str) -> bool:
    return name.startswith("dut.")


def _tile_twelve(terms: TwelveTerms, n: int) -> TwelveTerms:
    return TwelveTerms(*(_tile_terms(p, n) for p in
                         (terms.port1, terms.port2, terms.forward, terms.reverse)))


@dataclass(frozen=True, eq=False)
class CorrectedTransmission:
    """U of |S21| or |S12| after a full two-port calibration (all arrays (F,)); the
    load match is corrected, so there is no bias (``bias`` is None)."""

    s21_abs: np.ndarray  # |S21| or |S12|, whichever parameter this is
    u_abs: np.ndarray
    expanded: np.ndarray
    near_match: np.ndarray  # bool: U is the 95 % radius of the complex error
    covariance: np.ndarray
    bias: None = None


def full_two_port_uncertainty(setup: FullSetup, budget: Budget
                              ) -> tuple[dict[str, Any], dict[str, CorrectedTransmission]]:
    """({S11, S22: ReflectionUncertainty}, {S21, S12: CorrectedTransmission}) per point."""
    from acquire.uncertainty.propagate import Contribution, reflection_from_contributions

    table = inputs(budget, setup.method, setup.isolation)
    centre, deriv = sensitivities(setup, table, np.asarray(budget.noise, np.float64))
    reflection: dict[str, Any] = {}
    transmission: dict[str, CorrectedTransmission] = {}
    for p in TWO_PORT_PARAMS:
        parts = [Contribution(deriv[n][p], i.kind, i.size) for n, i in table.items()]
        unc = reflection_from_contributions(centre[p], parts)
        if p in ("S11", "S22"):
            reflection[p] = unc
        else:
            transmission[p] = CorrectedTransmission(unc.gamma_abs, unc.u_abs, unc.expanded,
                                                    unc.near_match, unc.covariance)
    return reflection, transmission
