"""Full two-port calibration (12-term, defined and unknown thru) and the method registry.

Oracles: scikit-rf 2.2 ``TwelveTerm`` / ``SOLT`` (defined thru) and ``UnknownThru``
(A. Ferrero and U. Pisani, IEEE MGWL 2(12), 1992) on the same raw data, plus
``skrf.calibration.terminate`` for the switch terms (R. B. Marks, 50th ARFTG Digest,
1997). Error boxes are random (seeded) but smooth in frequency.
"""

from __future__ import annotations

import logging

import numpy as np
import pytest
import skrf as rf
from skrf.calibration import SOLT, TwelveTerm, UnknownThru, terminate

from acquire.calibration import (
    ALIASES,
    METHODS,
    load_kit,
    method,
    remove_switch_terms,
    solve,
)
from acquire.calibration import methods as methods_module
from acquire.errors import CalError
from acquire.sweep import Sweep

KIT = load_kit("generic-sma-50")
TERM_MAP = {  # our flat name -> scikit-rf 12-term coefficient
    "S11.directivity": "forward directivity", "S11.source_match": "forward source match",
    "S11.reflection_tracking": "forward reflection tracking",
    "S21.transmission_tracking": "forward transmission tracking",
    "S21.load_match": "forward load match", "S21.isolation": "forward isolation",
    "S22.directivity": "reverse directivity", "S22.source_match": "reverse source match",
    "S22.reflection_tracking": "reverse reflection tracking",
    "S12.transmission_tracking": "reverse transmission tracking",
    "S12.load_match": "reverse load match", "S12.isolation": "reverse isolation",
}


def _freq(points: int = 201) -> rf.Frequency:
    return rf.Frequency(0.01, 6.0, points, unit="GHz")


def _c(f: np.ndarray, rng: np.random.Generator, mag: float, delay: float) -> np.ndarray:
    w = 2 * np.pi * f
    return mag * np.exp(-1j * w * delay + 1j * rng.uniform(0, 2 * np.pi)) * (
        1 + 0.2 * np.sin(w * 0.3e-9 + rng.uniform(0, 6)))


def _twelve(freq: rf.Frequency, seed: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    f = freq.f
    return {
        "forward directivity": _c(f, rng, 0.04, 0.2e-9),
        "forward source match": _c(f, rng, 0.12, 0.4e-9),
        "forward reflection tracking": _c(f, rng, 0.8, 3e-9),
        "forward transmission tracking": _c(f, rng, 0.7, 5e-9),
        "forward load match": _c(f, rng, 0.1, 0.6e-9),
        "forward isolation": _c(f, rng, 1e-4, 0),
        "reverse directivity": _c(f, rng, 0.05, 0.3e-9),
        "reverse load match": _c(f, rng, 0.11, 0.2e-9),
        "reverse reflection tracking": _c(f, rng, 0.75, 3e-9),
        "reverse transmission tracking": _c(f, rng, 0.65, 5e-9),
        "reverse source match": _c(f, rng, 0.09, 0.5e-9),
        "reverse isolation": _c(f, rng, 1e-4, 0),
    }


def _net(freq: rf.Frequency, s: np.ndarray) -> rf.Network:
    return rf.Network(frequency=freq, s=s, z0=50)


def _reflect(freq: rf.Frequency, g: np.ndarray) -> rf.Network:
    s = np.zeros((g.size, 2, 2), complex)
    s[:, 0, 0] = s[:, 1, 1] = g
    return _net(freq, s)


def _thru(freq: rf.Frequency) -> rf.Network:
    t11, t21 = KIT.thru_s("thru", freq.f)
    return _net(freq, np.stack([np.stack([t11, t21], -1), np.stack([t21, t11], -1)], -2))


def _dut(freq: rf.Frequency) -> rf.Network:
    """A lossy, mismatched two-port: 12 cm of 30 Ω line between 50 Ω ports."""
    line = rf.media.DefinedGammaZ0(frequency=freq, z0_port=50, z0=30,
                                   gamma=1j * freq.w / 3e8 + 0.05)
    return _net(freq, line.line(0.12, "m").s)


def _raw(net: rf.Network) -> dict[str, np.ndarray]:
    return {f"S{i + 1}{j + 1}": net.s[:, i, j] for i in range(2) for j in range(2)}


def _defined_thru_case(seed: int) -> tuple[rf.Frequency, TwelveTerm, dict[str, np.ndarray],
                                           list[rf.Network], list[rf.Network]]:
    freq = _freq()
    box = TwelveTerm.from_coefs(freq, _twelve(freq, seed), n_thrus=1)
    ideals = [_reflect(freq, KIT.reflection(n, freq.f)) for n in ("open", "short", "load")]
    ideals.append(_thru(freq))
    measured = [box.embed(n) for n in ideals]
    raw: dict[str, np.ndarray] = {}
    for name, m in zip(("open", "short", "load"), measured, strict=False):
        raw[f"{name}.S11"], raw[f"{name}.S22"] = m.s[:, 0, 0], m.s[:, 1, 1]
    raw.update({f"thru.{k}": v for k, v in _raw(measured[3]).items()})
    load = measured[2]
    raw["load.S21"], raw["load.S12"] = load.s[:, 1, 0], load.s[:, 0, 1]
    return freq, box, raw, measured, ideals


@pytest.mark.parametrize("oracle", [TwelveTerm, SOLT])
def test_defined_thru_terms_and_correction_match_scikit_rf(oracle: type) -> None:
    freq, box, raw, measured, ideals = _defined_thru_case(11)
    iso = _net(freq, np.stack([np.stack([0 * freq.f, raw["load.S12"]], -1),
                               np.stack([raw["load.S21"], 0 * freq.f], -1)], -2))
    cal = oracle(measured=measured, ideals=ideals, n_thrus=1, isolation=iso)
    cal.run()
    solution = solve("two-port", freq.f, raw, KIT, isolation="load.S21")
    ours = solution.model.flat_terms()
    theirs = cal.coefs_12term
    for name, key in TERM_MAP.items():
        assert np.abs(ours[name] - theirs[key]).max() < 1e-9, name
        assert np.abs(ours[name] - box.coefs_12term[key]).max() < 1e-9, name  # the truth
    dut = _dut(freq)
    raw_dut = box.embed(dut)
    corrected = solution.model.correct(Sweep(freq.f, raw_dut.s))
    assert corrected.meta["cal_corrected"] == ["S11", "S22", "S21", "S12"]
    assert np.abs(corrected.s - cal.apply_cal(raw_dut).s).max() < 1e-9
    assert np.abs(corrected.s - dut.s).max() < 1e-9


def test_defined_thru_with_an_offset_thru_and_no_isolation() -> None:
    """A thru with delay and loss (the kit's offset model) and no isolation reading."""
    freq = _freq(101)
    kit = load_kit("generic-sma-50")
    coefs = _twelve(freq, 5)
    coefs["forward isolation"] = coefs["reverse isolation"] = np.zeros(freq.f.size, complex)
    box = TwelveTerm.from_coefs(freq, coefs, n_thrus=1)
    line = rf.media.DefinedGammaZ0(frequency=freq, z0=50, gamma=1j * freq.w / 2e8 + 0.02)
    thru = _net(freq, line.line(0.05, "m").s)
    raw = {}
    for name in ("open", "short", "load"):
        m = box.embed(_reflect(freq, kit.reflection(name, freq.f)))
        raw[f"{name}.S11"], raw[f"{name}.S22"] = m.s[:, 0, 0], m.s[:, 1, 1]
    raw.update({f"thru.{k}": v for k, v in _raw(box.embed(thru)).items()})

    class OffsetKit:  # the project's kit with this thru's S-parameters
        def __getattr__(self, name):
            return getattr(kit, name)

        def thru_s(self, name, f):
            return thru.s[:, 0, 0], thru.s[:, 1, 0]

    model = solve("two-port", freq.f, raw, OffsetKit()).model
    dut = _dut(freq)
    out = model.correct(Sweep(freq.f, box.embed(dut).s))
    assert np.abs(out.s - dut.s).max() < 1e-9


def _eight_term_case(seed: int):
    """Physical 8-term boxes plus switch terms, built with scikit-rf (terminate)."""
    freq = _freq()
    f = freq.f
    rng = np.random.default_rng(seed)

    def box(dir_mag: float, src_mag: float) -> rf.Network:
        s = np.empty((f.size, 2, 2), complex)
        s[:, 0, 0] = _c(f, rng, dir_mag, 0.2e-9)
        s[:, 1, 1] = _c(f, rng, src_mag, 0.5e-9)
        s[:, 0, 1] = _c(f, rng, 0.9, 2e-9)
        s[:, 1, 0] = _c(f, rng, 0.85, 2e-9)
        return _net(freq, s)

    x, y = box(0.05, 0.12), box(0.04, 0.10)
    gf = _net(freq, _c(f, rng, 0.2, 1e-9).reshape(-1, 1, 1))
    gr = _net(freq, _c(f, rng, 0.25, 1.2e-9).reshape(-1, 1, 1))

    def measure(dut: rf.Network) -> rf.Network:
        return terminate(x ** dut ** y.flipped(), gf, gr)

    return freq, measure, gf, gr


def test_unknown_thru_matches_scikit_rf_and_recovers_the_device() -> None:
    freq, measure, gf, gr = _eight_term_case(3)
    kit = load_kit("generic-sma-50")
    ideals = [_reflect(freq, kit.reflection(n, freq.f)) for n in ("open", "short", "load")]
    line = rf.media.DefinedGammaZ0(frequency=freq, z0_port=50, z0=45,
                                   gamma=1j * freq.w / 2.1e8 + 0.03)
    thru = _net(freq, line.line(0.03, "m").s)  # unknown to the solver: mismatched, lossy
    measured = [measure(n) for n in (*ideals, thru)]
    raw = {}
    for name, m in zip(("open", "short", "load"), measured, strict=False):
        raw[f"{name}.S11"], raw[f"{name}.S22"] = m.s[:, 0, 0], m.s[:, 1, 1]
    raw.update({f"thru.{k}": v for k, v in _raw(measured[3]).items()})
    raw["switch.forward"], raw["switch.reverse"] = gf.s[:, 0, 0], gr.s[:, 0, 0]
    estimate = np.exp(-2j * np.pi * freq.f * 150e-12)  # the thru's delay roughly known

    class RoughThruKit:  # the project's kit whose thru model is only that estimate
        def __getattr__(self, name):
            return getattr(kit, name)

        def thru_s(self, name, f):
            return 0 * estimate, estimate

    guess = _net(freq, np.stack([np.stack([0 * estimate, estimate], -1),
                                 np.stack([estimate, 0 * estimate], -1)], -2))
    cal = UnknownThru(measured=measured, ideals=[*ideals, guess], switch_terms=(gf, gr))
    cal.run()
    solution = solve("two-port-unknown-thru", freq.f, raw, RoughThruKit())
    ours = solution.model.flat_terms()
    for name, key in TERM_MAP.items():
        assert np.abs(ours[name] - cal.coefs_12term[key]).max() < 1e-9, name
    dut = _dut(freq)
    corrected = solution.model.correct(Sweep(freq.f, measure(dut).s))
    assert np.abs(corrected.s - cal.apply_cal(measure(dut)).s).max() < 1e-9
    assert np.abs(corrected.s - dut.s).max() < 1e-9
    assert solution.figures["thru_s21_db_median"] == pytest.approx(
        np.median(20 * np.log10(np.abs(thru.s[:, 1, 0]))), abs=1e-9)


def test_switch_terms_removed_as_scikit_rf_unterminates() -> None:
    freq, measure, gf, gr = _eight_term_case(8)
    m = measure(_dut(freq))
    ours = remove_switch_terms(m.s, gf.s[:, 0, 0], gr.s[:, 0, 0])
    theirs = rf.calibration.unterminate(m, gf, gr).s
    assert np.abs(ours - theirs).max() < 1e-12


def test_two_port_refuses_missing_port_two_and_non_thru() -> None:
    freq, _, raw, _, _ = _defined_thru_case(2)
    partial = {k: v for k, v in raw.items() if not k.endswith("S22") or k.startswith("thru")}
    with pytest.raises(CalError, match=r"two-port calibration: no raw reading 'open.S22'"):
        solve("two-port", freq.f, partial, KIT)
    with pytest.raises(CalError, match="needs exactly one thru standard"):
        solve("two-port", freq.f, raw, KIT, standards=("open", "short", "load"))
    flat = {**raw, "switch.forward": 0 * freq.f, "switch.reverse": 0 * freq.f,
            "thru.S21": 0 * freq.f}
    with pytest.raises(CalError, match="the thru reads no transmission: not a thru"):
        solve("two-port-unknown-thru", freq.f, flat, KIT)


# -- the registry and the names ----------------------------------------------------------


def test_registry_is_the_one_list_of_methods() -> None:
    """Plan choices, guided steps and the solver all come from METHODS."""
    from acquire.guided.steps import build_steps
    from acquire.plan import load_plan  # noqa: F401  (plans validate against METHODS)

    assert set(ALIASES.values()) <= set(METHODS)
    for m in METHODS.values():
        assert m.summary and m.steps and method(m.name) is m
        if m.name != "two-port-unknown-thru":
            steps = build_steps(m.name, KIT, ports=2)
            assert [s.standard for s in steps] == [s.standard for s in m.step_specs]
    two = build_steps("two-port", KIT, ports=2)
    assert [s.name for s in two] == ["open", "short", "load", "open-2", "short-2", "load-2",
                                     "thru"]
    assert [s.port for s in two] == [1, 1, 1, 2, 2, 2, 0]
    with pytest.raises(CalError, match="calibrates two ports; the plan measures S11 only"):
        build_steps("two-port", KIT, ports=1)


@pytest.mark.parametrize(("old", "new"), sorted(ALIASES.items()))
def test_old_names_still_solve_with_one_warning(old: str, new: str,
                                                caplog: pytest.LogCaptureFixture,
                                                monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(methods_module, "_warned", set())
    with caplog.at_level(logging.WARNING):
        assert method(old) is METHODS[new]
        assert method(old) is METHODS[new]
    lines = [r.getMessage() for r in caplog.records]
    assert lines == [f"calibration method '{old}' is now called '{new}'; the old name still "
                     "works but is deprecated"]


# -- guided checks of a two-port calibration ---------------------------------------------


def _held(freq: np.ndarray, placement: dict[str, tuple[str, str]]) -> dict:
    """Readings of the simulator's error box: step -> (standard at port 1, at port 2)."""
    from simulators.errorbox import measure, reference_plane_terms

    terms = reference_plane_terms(freq)
    held = {}
    for step, (p1, p2) in placement.items():
        s = np.zeros((freq.size, 2, 2), complex)
        s[:, 0, 0] = KIT.reflection(p1, freq)
        s[:, 1, 1] = KIT.reflection(p2, freq)
        m = measure(terms, s)
        held[step] = {"S11": m[:, 0, 0], "S22": m[:, 1, 1]}
    return held


def test_standards_put_on_the_wrong_port_are_called_swapped_ports() -> None:
    from acquire.guided.judge import Judge
    from acquire.guided.steps import build_steps

    f = np.linspace(10e6, 6e9, 101)
    steps = build_steps("two-port", KIT, ports=2)
    judge = Judge(f, KIT, steps)
    right = _held(f, {"open": ("open", "open"), "short": ("short", "open"),
                      "load": ("load", "open")})
    assert judge.readings(right).passed
    wrong = _held(f, {"open": ("open", "open"), "short": ("open", "short"),
                      "load": ("open", "load")})  # port 1 left open, standards at port 2
    (finding,) = judge.readings(wrong).failures
    assert finding.check == "ports-swapped" and set(finding.steps) == {"open", "short", "load"}
    assert "they went to port 2" in finding.message
    # the port-2 steps the same way round
    held = {**right, **{f"{k}-2": v for k, v in _held(f, {
        "open": ("open", "open"), "short": ("short", "open"), "load": ("load", "open")}).items()}}
    (finding,) = judge.readings(held).failures
    assert finding.check == "ports-swapped" and "they went to port 1" in finding.message
    # a standard simply measured twice (nothing changes at either port) is not a swap
    twice = _held(f, {"open": ("open", "open"), "short": ("open", "open")})
    (finding,) = judge.readings(twice).failures
    assert finding.check == "same-reading"


def test_two_port_thru_is_checked_at_port_two_too() -> None:
    from acquire.guided.judge import Judge
    from acquire.guided.steps import build_steps
    from simulators.errorbox import measure, reference_plane_terms

    f = np.linspace(10e6, 6e9, 101)
    steps = build_steps("two-port", KIT, ports=2)
    held = _held(f, {n: (n, n) for n in ("open", "short", "load")})
    held.update({f"{n}-2": v for n, v in _held(f, {n: (n, n) for n in
                                                   ("open", "short", "load")}).items()})
    terms = reference_plane_terms(f)
    thru = np.zeros((f.size, 2, 2), complex)
    thru[:, 1, 0] = thru[:, 0, 1] = 1.0
    m = measure(terms, thru)
    held["thru"] = {f"S{i + 1}{j + 1}": m[:, i, j] for i in range(2) for j in range(2)}
    assert Judge(f, KIT, steps).readings(held).passed
    loose = np.array(thru)
    loose[:, 1, 1] = 0.95  # port 2's end reflects: the thru is not seated there
    m = measure(terms, loose)
    held["thru"] = {f"S{i + 1}{j + 1}": m[:, i, j] for i in range(2) for j in range(2)}
    (finding,) = Judge(f, KIT, steps).readings(held).failures
    assert finding.check == "thru-match" and "port 2 sees |S22|" in finding.message


def test_old_names_in_plans_and_cal_sets_still_load(tmp_path, caplog, monkeypatch) -> None:
    from acquire.calibration import CalSet
    from acquire.plan import load_plan
    from drivers.stimulus import Stimulus

    monkeypatch.setattr(methods_module, "_warned", set())
    plan = tmp_path / "old.yaml"
    plan.write_text("plan: old\ninstrument: {resource: 'TCPIP::127.0.0.1::5025::SOCKET', "
                    "dialect: scpi-generic}\nstimulus: {start: 1 GHz, stop: 2 GHz, points: 11, "
                    "power: 0 dBm, if_bandwidth: 1 kHz}\nmeasure: two-port\n"
                    "calibration: {method: enhanced-response, kit: generic-sma-50}\n")
    with caplog.at_level(logging.WARNING):
        assert load_plan(plan).calibration.method == "one-path-two-port"
    (line,) = [r.getMessage() for r in caplog.records]
    assert line == (f"plan {plan}: calibration.method: calibration method 'enhanced-response' "
                    "is now called 'one-path-two-port'; the old name still works but is "
                    "deprecated")
    f = np.linspace(1e9, 2e9, 11)
    raw = {"thru.S21": np.full(f.size, 0.5 + 0j)}
    model = solve("thru-response", f, raw, KIT).model
    assert model.method == "transmission-normalisation"
    old = type(model)("thru-response", f, model.reflection, model.transmission)
    cal = CalSet("old", old, Stimulus(1e9, 2e9, 11, 0.0, 1e3), "x,y,z,1", KIT.name,
                 KIT.sha256, "plane", raw=raw)
    path = cal.save(tmp_path)
    caplog.clear()
    monkeypatch.setattr(methods_module, "_warned", set())
    with caplog.at_level(logging.WARNING):
        back = CalSet.load(path)
    assert back.method == "thru-response" and back.id == cal.id  # the id covers the name
    assert method(back.method).name == "transmission-normalisation"
    (line,) = [r.getMessage() for r in caplog.records]
    assert line.startswith(f"cal set {path}: calibration method 'thru-response' is now called")


def test_port_two_term_findings_name_the_port_two_steps() -> None:
    """A bad port-2 load (the directivity term blows up) asks to repeat LOAD at port 2,
    not the port-1 load."""
    from acquire.calibration import OnePortTerms
    from acquire.guided.judge import Judge
    from acquire.guided.steps import build_steps

    f = np.linspace(10e6, 6e9, 51)
    judge = Judge(f, KIT, build_steps("two-port", KIT, ports=2))
    bad = OnePortTerms(np.full(f.size, 0.8 + 0j), np.full(f.size, 0.05 + 0j),
                       np.exp(-2j * np.pi * f * 1e-9))
    (finding,) = judge.terms(bad, port=2).failures
    assert finding.check == "directivity" and finding.steps == ("load-2",)
    (finding,) = judge.terms(bad).failures
    assert finding.steps == ("load",)


def test_uncertainty_still_accepts_the_renamed_one_path_method() -> None:
    """The uncertainty budget needs a full reflection correction; the one-path method keeps
    qualifying under its new name (and cal sets under its old one)."""
    from acquire.calibration import CalSet
    from acquire.uncertainty.capture import sweep_uncertainty
    from drivers.stimulus import Stimulus
    from simulators.errorbox import measure, reference_plane_terms

    f = np.linspace(1e9, 2e9, 21)
    terms = reference_plane_terms(f)
    raw = {}
    for name in ("open", "short", "load"):
        s = np.zeros((f.size, 2, 2), complex)
        s[:, 0, 0] = KIT.reflection(name, f)
        raw[f"{name}.S11"] = measure(terms, s)[:, 0, 0]
    thru = np.zeros((f.size, 2, 2), complex)
    thru[:, 1, 0] = thru[:, 0, 1] = 1.0
    m = measure(terms, thru)
    raw["thru.S11"], raw["thru.S21"] = m[:, 0, 0], m[:, 1, 0]
    model = solve("one-path-two-port", f, raw, KIT).model
    stim = Stimulus(1e9, 2e9, 21, 0.0, 1e3)
    dut = np.zeros((f.size, 2, 2), complex)
    dut[:, 0, 0] = 0.2
    sweep = Sweep(f, measure(terms, dut))
    for name in ("one-path-two-port", "enhanced-response"):
        renamed = type(model)(name, f, model.reflection, model.transmission)
        cal = CalSet("p", renamed, stim, "x,y,z,1", KIT.name, KIT.sha256, "plane", raw=raw)
        result = sweep_uncertainty(cal.correct(sweep), cal, KIT)
        assert result.unavailable is None, (name, result.unavailable)
