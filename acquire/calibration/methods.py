"""Calibration methods: which standards each needs, solving them, correcting sweeps.

An ``ErrorModel`` holds named error terms on one frequency grid, keyed by the
S-parameter they correct: reflection terms under ``S11``/``S22``, transmission terms under
``S21``/``S12``. Flat names (``"S11.directivity"``) are what a cal set file stores.

Raw standard readings are passed flat too: ``{"open.S11": array, "thru.S21": array}``,
keyed ``<kit standard name>.<S-parameter>``.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np

from acquire.calibration.kit import CalKit
from acquire.calibration.model import (
    ONE_PORT_TERMS,
    TRANSMISSION_TERMS,
    OnePortTerms,
    TransmissionTerms,
    solve_one_port,
    solve_open_short_average,
    solve_response,
    solve_thru,
    solve_two_term,
)
from acquire.errors import CalError
from acquire.sweep import Sweep


@dataclass(frozen=True)
class Method:
    """A calibration method: the standards it measures, in step order."""

    name: str
    steps: tuple[str, ...]
    summary: str


METHODS: dict[str, Method] = {m.name: m for m in (
    Method("one-port", ("open", "short", "load"),
           "full one-port: directivity, source match and reflection tracking"),
    Method("response-open", ("open",), "reflection tracking from an open only"),
    Method("response-short", ("short",), "reflection tracking from a short only"),
    Method("response-open-short", ("open", "short"),
           "reflection tracking from the open/short average"),
    Method("response-open-load", ("open", "load"), "open plus load: tracking and directivity"),
    Method("response-short-load", ("short", "load"), "short plus load: tracking and directivity"),
    Method("thru-response", ("thru",), "transmission tracking from a thru"),
    Method("enhanced-response", ("open", "short", "load", "thru"),
           "full one-port on the source port plus transmission tracking from a thru"),
)}


def method(name: str) -> Method:
    """Look up a method by name; ``CalError`` listing the known ones."""
    try:
        return METHODS[name]
    except KeyError:
        raise CalError(f"unknown calibration method '{name}' "
                       f"(known: {', '.join(METHODS)})") from None


def reflection_param(port: int) -> str:
    return f"S{port}{port}"


def transmission_param(port: int) -> str:
    """The transmission parameter whose source is ``port`` (S21 from port 1)."""
    return "S21" if port == 1 else "S12"


@dataclass(frozen=True, eq=False)
class ErrorModel:
    """Solved error terms on a frequency grid; corrects raw sweeps."""

    method: str
    freq_hz: np.ndarray
    reflection: Mapping[str, OnePortTerms] = field(default_factory=dict)
    transmission: Mapping[str, TransmissionTerms] = field(default_factory=dict)

    def __post_init__(self) -> None:
        freq = np.array(self.freq_hz, dtype=np.float64)
        freq.flags.writeable = False
        object.__setattr__(self, "freq_hz", freq)
        object.__setattr__(self, "reflection", MappingProxyType(dict(self.reflection)))
        object.__setattr__(self, "transmission", MappingProxyType(dict(self.transmission)))

    @property
    def params(self) -> tuple[str, ...]:
        """The S-parameters this model corrects."""
        return (*self.reflection, *self.transmission)

    def flat_terms(self) -> dict[str, np.ndarray]:
        """All terms as ``{"S11.directivity": array, ...}``."""
        out = {}
        for param, terms in (*self.reflection.items(), *self.transmission.items()):
            out.update({f"{param}.{n}": a for n, a in terms.as_dict().items()})
        return out

    @classmethod
    def from_flat(cls, method_name: str, freq_hz: np.ndarray,
                  terms: Mapping[str, np.ndarray]) -> ErrorModel:
        """Rebuild from flat named terms (as stored in a cal set)."""
        groups: dict[str, dict[str, np.ndarray]] = {}
        for key, arr in terms.items():
            param, _, name = key.partition(".")
            groups.setdefault(param, {})[name] = arr
        reflection, transmission = {}, {}
        for param, group in groups.items():
            if param in ("S11", "S22") and set(group) == set(ONE_PORT_TERMS):
                reflection[param] = OnePortTerms.from_terms(group)
            elif param in ("S21", "S12") and set(group) == set(TRANSMISSION_TERMS):
                transmission[param] = TransmissionTerms.from_terms(group)
            else:
                raise ValueError(f"unexpected error terms for {param}: {', '.join(sorted(group))}")
        return cls(method_name, freq_hz, reflection, transmission)

    def correct_param(self, param: str, sweep: Sweep) -> np.ndarray:
        """The corrected values of one covered parameter of ``sweep``."""
        if param in self.reflection:
            return self.reflection[param].correct(sweep.param(param))
        terms = self.transmission[param]
        source = reflection_param(1 if param == "S21" else 2)
        if source in self.reflection and sweep.ports > 1:
            s11 = self.reflection[source].correct(sweep.param(source))
            return terms.correct(sweep.param(param), self.reflection[source].source_match, s11)
        return terms.correct(sweep.param(param))

    def correct(self, sweep: Sweep, **meta: Any) -> Sweep:
        """A corrected copy of ``sweep`` (same grid required); uncovered parameters stay raw.

        Adds ``cal_corrected`` (list of corrected parameters) and ``meta`` to the sweep's
        metadata. Raises ``CalError`` on another grid or when nothing can be corrected.
        """
        if sweep.freq_hz.shape != self.freq_hz.shape or not np.allclose(
            sweep.freq_hz, self.freq_hz, rtol=1e-12, atol=0.0
        ):
            raise CalError(f"calibration grid ({self.freq_hz.size} points) does not match the "
                           f"sweep ({sweep.points} points): recalibrate or interpolate")
        present = [p for p in self.params if int(p[1]) <= sweep.ports and int(p[2]) <= sweep.ports]
        if not present:
            raise CalError(f"calibration corrects {', '.join(self.params)} but the sweep holds "
                           f"a {sweep.ports}-port measurement")
        s = np.array(sweep.s)
        for param in present:
            values = self.correct_param(param, sweep)
            bad = ~np.isfinite(values)
            if bad.any():
                from acquire.units import format_frequency

                at = format_frequency(float(self.freq_hz[np.argmax(bad)]))
                raise CalError(f"{param} correction is singular at {at}: the error terms are "
                               f"unusable there; recalibrate")
            s[:, int(param[1]) - 1, int(param[2]) - 1] = values
        return sweep.with_data(s, cal_corrected=present, **meta)


@dataclass(frozen=True, eq=False)
class Solution:
    """A solved calibration plus its fit figures (JSON-able) and per-point arrays."""

    model: ErrorModel
    figures: Mapping[str, Any]
    residual: np.ndarray | None = None  # (F, K) least-squares misfit, one-port only
    independence: np.ndarray | None = None  # (F,) see OnePortFit


def solve(method_name: str, freq_hz: np.ndarray, raw: Mapping[str, np.ndarray], kit: CalKit,
          *, port: int = 1, standards: tuple[str, ...] | None = None,
          isolation: str | None = None) -> Solution:
    """Solve a calibration from raw standard readings.

    ``raw`` maps ``"<standard>.<param>"`` to (F,) complex readings. ``standards`` names the
    kit standards used (default: the method's steps); a one-port may list more than three
    reflect standards for a least-squares solve. ``isolation`` names a raw key (for
    example ``"isolation.S21"``) read with loads on both ports, if one was measured.
    """
    m = method(method_name)
    freq = np.asarray(freq_hz, np.float64)
    kit.check_range(freq)
    names = tuple(standards) if standards else m.steps
    if port not in (1, 2):
        raise CalError(f"port must be 1 or 2, got {port}")
    refl, trans = reflection_param(port), transmission_param(port)

    def reading(std: str, param: str) -> np.ndarray:
        key = f"{std}.{param}"
        if key not in raw:
            raise CalError(f"{method_name} calibration: no raw reading '{key}' "
                           f"(have: {', '.join(sorted(raw)) or 'none'})")
        values = np.asarray(raw[key], np.complex128)
        if values.shape != freq.shape:
            raise CalError(f"raw reading '{key}' has {values.size} points, grid has {freq.size}")
        return values

    def gamma(std: str) -> np.ndarray:
        return kit.reflection(std, freq)

    figures: dict[str, Any] = {"standards": list(names)}
    residual = independence = None
    reflection: dict[str, OnePortTerms] = {}
    transmission: dict[str, TransmissionTerms] = {}
    kinds = [kit.standard(n).kind for n in names]
    reflect_names = [n for n, k in zip(names, kinds, strict=True) if k != "thru"]
    if method_name not in ("one-port", "enhanced-response") and sorted(kinds) != sorted(m.steps):
        raise CalError(f"{method_name} calibration uses {', '.join(m.steps)}; "
                       f"got standards of kind {', '.join(kinds)}")
    if isolation is not None and "." not in isolation:
        raise CalError(f"isolation reading must be named '<standard>.<param>', got '{isolation}'")
    if method_name in ("one-port", "enhanced-response"):
        if len(reflect_names) < 3:
            raise CalError(f"{method_name} calibration needs at least three reflect standards, "
                           f"got {', '.join(reflect_names) or 'none'}")
        meas = np.stack([reading(n, refl) for n in reflect_names], axis=1)
        ideal = np.stack([gamma(n) for n in reflect_names], axis=1)
        fit = solve_one_port(meas, ideal, tuple(reflect_names), freq)
        reflection[refl] = fit.terms
        residual, independence = fit.residual, fit.independence
        figures["min_independence"] = float(np.min(fit.independence))
        if len(reflect_names) > 3:
            rel = np.abs(fit.residual) / np.abs(fit.terms.reflection_tracking)[:, None]
            figures["max_residual"] = {n: float(rel[:, k].max())
                                       for k, n in enumerate(reflect_names)}
    elif method_name in ("response-open", "response-short"):
        (std,) = reflect_names
        reflection[refl] = solve_response(reading(std, refl), gamma(std))
    elif method_name == "response-open-short":
        o, s = reflect_names
        reflection[refl] = solve_open_short_average(reading(o, refl), gamma(o),
                                                    reading(s, refl), gamma(s))
    elif method_name in ("response-open-load", "response-short-load"):
        std, load = reflect_names
        reflection[refl] = solve_two_term(reading(std, refl), gamma(std),
                                          reading(load, refl), gamma(load))
    if method_name in ("thru-response", "enhanced-response"):
        thrus = [n for n in names if kit.standard(n).kind == "thru"]
        if len(thrus) != 1:
            raise CalError(f"{method_name} calibration needs exactly one thru standard")
        t11, t21 = kit.thru_s(thrus[0], freq)
        iso = reading(*isolation.split(".", 1)) if isolation else None
        source = reflection.get(refl)
        transmission[trans] = solve_thru(
            reading(thrus[0], trans), t21, isolation=iso, source=source,
            s11m_thru=reading(thrus[0], refl) if source is not None else None,
            s11_model=t11, s22_model=t11,
        )
    return Solution(ErrorModel(method_name, freq, reflection, transmission), figures,
                    residual, independence)
