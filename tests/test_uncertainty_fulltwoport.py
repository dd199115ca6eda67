"""Uncertainty of S11, S21, S12 and S22 after a full two-port calibration.

Sources: the 12-term model and its closed-form correction (R. B. Marks, 50th ARFTG
Digest, 1997; Kruppa and Sodomsky, IEEE MTT-19(1), 1971), the law of propagation with
numerical sensitivity coefficients (JCGM 100:2008, GUM, 5.1.2 and 5.1.3 note 2) checked
by a Monte Carlo of the whole error model (JCGM 101:2008, GUM Supplement 1; the issue
asks for agreement within 10 % of U): each trial draws every input from the distribution
the budget states, solves the whole calibration again with the project's solver and
corrects the device. scikit-rf 2.2's ``SOLT`` and ``UnknownThru`` (A. Ferrero and
U. Pisani, IEEE MGWL 2(12), 1992) solve a subset of the same trials independently.
End to end, the simulator's ground truth (independently written world) must lie within
U at 95 % of points or more.
"""

from __future__ import annotations

import io
import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
import skrf as rf
import yaml
from skrf.calibration import SOLT, UnknownThru

from acquire.calibration import CalSet, ErrorModel, OnePortTerms, load_kit, solve
from acquire.calibration.twoport import TWO_PORT_PARAMS, _from_eight_term, correct_twelve
from acquire.checks import evaluate_checks
from acquire.cli import main
from acquire.guided import Options, calibrate
from acquire.plan import load_plan
from acquire.plots import render
from acquire.sweep import Sweep
from acquire.touchstone import read_touchstone
from acquire.twoport_checks import InsertionLossCheck, ReturnLossCheck
from acquire.uncertainty.budget import Budget
from acquire.uncertainty.capture import SweepUncertainty, from_summary, sweep_uncertainty
from acquire.uncertainty.decision import DecisionRule
from acquire.uncertainty.fulltwoport import (
    DEFINED,
    METHODS,
    SWITCH,
    UNKNOWN,
    FullSetup,
    Input,
    corrected,
    full_two_port_uncertainty,
    inputs,
    project_solver,
    readings,
)
from acquire.uncertainty.plot import attach_from_summary
from drivers.stimulus import Stimulus
from simulators.bench import Bench, noise_sigma
from simulators.server import SimServer
from tests.schema_support import validate

KIT = load_kit("generic-sma-50")
F = np.linspace(10e6, 6e9, 7)
W = 2 * np.pi * F
NAMES = {"open": "open", "short": "short", "load": "load", "thru": "thru"}
INDEX = {"S11": (0, 0), "S21": (1, 0), "S12": (0, 1), "S22": (1, 1)}


def _c(mag: float, delay: float, phase: float) -> np.ndarray:
    return mag * np.exp(1j * phase - 1j * W * delay)


# 8-term boxes plus switch terms, turned into 12 terms (consistent for both methods)
TERMS = _from_eight_term(
    OnePortTerms(_c(0.05, 0.3e-9, 0.0), _c(0.15, 0.5e-9, 1.0), _c(0.7, 3e-9, 2.0)),
    OnePortTerms(_c(0.04, 0.2e-9, 0.5), _c(0.12, 0.4e-9, 2.0), _c(0.75, 3e-9, 0.3)),
    _c(0.7, 5e-9, 1.0), _c(0.2, 1e-9, 0.0), _c(0.15, 1.2e-9, 1.0), 0 * W + 0j, 0 * W + 0j)


def _two_port(s11, s21, s22) -> np.ndarray:
    s = np.empty((F.size, 2, 2), np.complex128)
    s[:, 0, 0], s[:, 1, 1] = np.broadcast_to(s11, F.shape), np.broadcast_to(s22, F.shape)
    s[:, 1, 0] = s[:, 0, 1] = np.broadcast_to(s21, F.shape)
    return s


DEVICES = {  # invented devices; |S11|² + |S21|² <= 1 each
    "matched 6 dB attenuator": _two_port(0.004 * np.exp(1j * W * 1e-9), 0.5 * np.exp(
        -1j * W * 0.4e-9), -0.003j),
    "mismatched filter passband": _two_port(0.3j * np.exp(-1j * W * 0.2e-9), 0.9 * np.exp(
        -1j * W * 2e-9), -0.25),
    "near-reflective stop band": _two_port(0.95 * np.exp(-1j * W * 0.5e-9), 0.002 * np.exp(
        -1j * W * 3e-9), 0.9j),
}
BUDGETS = {
    "defaults, 2 h": Budget(cal_age_s=7200, noise=0.0005),
    "noisy, worn connector": Budget(load_error=0.005, phase_error_deg=2.0, magnitude_error=0.01,
                                    repeatability=0.006, noise=0.003, cal_age_s=600,
                                    thru_error=0.01),
}


def _setup(method: str, device: str, isolation: bool = True) -> FullSetup:
    return FullSetup(method, KIT, F, NAMES, TERMS, DEVICES[device], isolation)


def _draw(table: dict[str, Input], shape: tuple[int, ...], rng: np.random.Generator
          ) -> dict[str, np.ndarray]:
    """Each input from its stated distribution (budget module docstring)."""
    x = {}
    for name, i in table.items():
        if i.kind == "rect":
            x[name] = rng.uniform(-i.size, i.size, shape) + 0j
        elif i.kind == "disc":
            x[name] = i.size * np.sqrt(rng.uniform(0, 1, shape)) * np.exp(
                2j * np.pi * rng.uniform(0, 1, shape))
        else:
            x[name] = i.size * (rng.standard_normal(shape) + 1j * rng.standard_normal(shape))
    return x


def _trials(setup: FullSetup, budget: Budget, n: int, seed: int
            ) -> tuple[FullSetup, dict[str, np.ndarray], np.ndarray]:
    table = inputs(budget, setup.method, setup.isolation)
    x = _draw(table, (n * F.size,), np.random.default_rng(seed))
    return setup.tiled(n), x, np.full(n * F.size, float(budget.noise))


@pytest.mark.parametrize("method", METHODS)
def test_the_model_at_zero_gives_the_device_back(method: str) -> None:
    """No deviation at all: the solved calibration is the error box and the corrected
    device is the device (the 12-term model is exact, Marks 1997)."""
    for device in DEVICES:
        setup = _setup(method, device)
        out = corrected(setup, {}, np.full(F.size, 1e-3))
        for p, (i, j) in INDEX.items():
            assert np.abs(out[p] - DEVICES[device][:, i, j]).max() < 1e-12


@pytest.mark.parametrize("method", METHODS)
def test_the_model_is_holomorphic_in_its_complex_inputs(method: str) -> None:
    """One complex sensitivity per complex input is enough only if a step along j moves
    the result j times as much as a real step (Cauchy-Riemann)."""
    setup = _setup(method, "mismatched filter passband")
    noise = np.full(F.size, 1e-3)
    budget = BUDGETS["noisy, worn connector"]
    for name, i in inputs(budget, method, True).items():
        if i.kind == "rect":
            continue
        d = {step: corrected(setup, {name: step * 1e-6}, noise) for step in (1, -1, 1j, -1j)}
        for p in TWO_PORT_PARAMS:
            along_real = (d[1][p] - d[-1][p]) / 2e-6
            along_imag = (d[1j][p] - d[-1j][p]) / 2e-6j
            assert np.abs(along_imag - along_real).max() <= 1e-6 * max(
                np.abs(along_real).max(), 1e-3), (name, p)


@pytest.mark.parametrize("trials", [5000, pytest.param(50_000, marks=pytest.mark.long)])
@pytest.mark.parametrize("budget", list(BUDGETS))
@pytest.mark.parametrize("device", list(DEVICES))
@pytest.mark.parametrize("method", METHODS)
def test_u_agrees_with_a_monte_carlo_of_the_whole_calibration(method: str, device: str,
                                                              budget: str, trials: int) -> None:
    """5,000 trials (50,000 with --long), each solving the whole calibration again
    (``project_solver``); per point and parameter the 95 % quantile of ||S_m| − |S|| (or
    of |S_m − S| where U is the near-zero radius) agrees with U within 10 % of U
    (largest difference 5.3 % of U with 20,000 trials when written)."""
    b = BUDGETS[budget]
    setup = _setup(method, device)
    reflection, transmission = full_two_port_uncertainty(setup, b)
    n = trials
    big, x, noise = _trials(setup, b, n, seed=7)
    mc = corrected(big, x, noise)
    for p, (i, j) in INDEX.items():
        unc = reflection.get(p) or transmission[p]
        truth = DEVICES[device][:, i, j]
        got = mc[p].reshape(n, F.size)
        mag = np.quantile(np.abs(np.abs(got) - np.abs(truth)), 0.95, axis=0)
        vec = np.quantile(np.abs(got - truth), 0.95, axis=0)
        q = np.where(unc.near_match, vec, mag)
        assert np.all(np.abs(q - unc.expanded) <= 0.10 * unc.expanded), (p, q, unc.expanded)


def _skrf_corrected(setup: FullSetup, raw: dict[str, np.ndarray], dut: np.ndarray
                    ) -> np.ndarray:
    """scikit-rf's SOLT (defined thru) or UnknownThru (switch terms) on one trial."""
    freq = rf.Frequency.from_f(setup.freq_hz, unit="Hz")

    def net(s: np.ndarray) -> rf.Network:
        return rf.Network(frequency=freq, s=s, z0=50)

    zero = np.zeros(F.size, np.complex128)
    measured, ideals = [], []
    for kind in ("open", "short", "load"):
        name = NAMES[kind]
        measured.append(net(np.stack([np.stack([raw[f"{name}.S11"], zero], -1),
                                      np.stack([zero, raw[f"{name}.S22"]], -1)], -2)))
        g = KIT.reflection(name, setup.freq_hz)
        ideals.append(net(np.stack([np.stack([g, zero], -1), np.stack([zero, g], -1)], -2)))
    measured.append(net(np.stack([np.stack([raw[f"thru.S{r}1"], raw[f"thru.S{r}2"]], -1)
                                  for r in (1, 2)], -2)))
    t11, t21 = KIT.thru_s("thru", setup.freq_hz)
    ideals.append(net(np.stack([np.stack([t11, t21], -1), np.stack([t21, t11], -1)], -2)))
    if setup.method == DEFINED:
        cal = SOLT(measured=measured, ideals=ideals, n_thrus=1)
    else:
        gf, gr = (net(raw[k].reshape(-1, 1, 1)) for k in SWITCH)
        cal = UnknownThru(measured=measured, ideals=ideals, switch_terms=(gf, gr))
    cal.run()
    return cal.apply_cal(net(dut)).s


@pytest.mark.parametrize("method", METHODS)
def test_an_independent_solver_corrects_the_trials_alike(method: str) -> None:
    """20 Monte Carlo trials of the noisy budget: scikit-rf's two-port calibration
    (SOLT, UnknownThru) on the same raw readings corrects the device as the project's
    solver does, to 1e-9 (no isolation: scikit-rf's default takes none)."""
    setup = _setup(method, "mismatched filter passband", isolation=False)
    n = 20
    big, x, noise = _trials(setup, BUDGETS["noisy, worn connector"], n, seed=11)
    raw, dut = readings(big, x, noise)
    ours = correct_twelve(project_solver(big, raw), dut)
    worst = 0.0
    for k in range(n):
        part = slice(k * F.size, (k + 1) * F.size)
        one = FullSetup(method, KIT, F, NAMES, TERMS, DEVICES["mismatched filter passband"])
        theirs = _skrf_corrected(one, {key: v[part] for key, v in raw.items()}, dut[part])
        for p, (i, j) in INDEX.items():
            worst = max(worst, float(np.abs(ours[p][part] - theirs[:, i, j]).max()))
    assert worst < 1e-9
    assert np.abs(ours["S21"] - big.device[:, 1, 0]).max() > 1e-3  # the trials really vary


# -- end to end on the simulator -----------------------------------------------------------

ROOT = Path(__file__).resolve().parents[1]
SIM_F = np.linspace(10e6, 6e9, 201)
SIM_SWEEP = {"power_dbm": -10.0, "if_bandwidth_hz": 1e3}


def _coverage(sweep, unc, truth: np.ndarray) -> float:
    """Share of the 4·F points whose error lies within U (|S| error, or the complex error
    where U is the near-zero radius)."""
    inside = []
    for p, (i, j) in INDEX.items():
        u = unc.reflection.get(p) or unc.transmission[p]
        got, want = sweep.param(p), truth[:, i, j]
        err = np.where(u.near_match, np.abs(got - want), np.abs(np.abs(got) - np.abs(want)))
        inside.append(err <= u.expanded)
    return float(np.mean(inside))


def _bench_calset(method: str, seed: int, device: str) -> tuple[Bench, CalSet]:
    """Readings of the noisy bench's standards (as tests/test_sim_twoport.py takes them),
    solved and stored as a cal set (the guided calibration cannot read switch terms)."""
    bench = Bench(noise=True, seed=seed, device=device)
    raw = {}
    for name in ("open", "short", "load"):
        bench.connect(name)
        m = bench.sweep(SIM_F, **SIM_SWEEP)
        raw[f"{name}.S11"], raw[f"{name}.S22"] = m[:, 0, 0], m[:, 1, 1]
    bench.connect("thru")
    m = bench.sweep(SIM_F, **SIM_SWEEP)
    raw.update({f"thru.S{i + 1}{j + 1}": m[:, i, j] for i in range(2) for j in range(2)})
    if method == UNKNOWN:
        raw[SWITCH[0]], raw[SWITCH[1]] = bench.switch_terms(SIM_F)
    model = solve(method, SIM_F, raw, KIT).model
    stim = Stimulus(SIM_F[0], SIM_F[-1], SIM_F.size, -10.0, 1e3)
    return bench, CalSet("feeder-line", model, stim, "a,b,c,d", KIT.name, KIT.sha256,
                         "test cable ends", raw=raw)


@pytest.mark.parametrize("method", METHODS)
def test_u_is_the_right_size_for_the_simulators_noise(method: str) -> None:
    """The simulator's only error is receiver noise (its standards are the kit's models,
    no drift); with a budget of that noise alone (σ per component of the bench's model,
    referred to the reference plane), the truth lies within U at close to 95 % of the
    points: pooled over four seeds and three devices 0.953 (defined thru) and 0.955
    (unknown thru) when written; per device and seed 0.944 to 0.965. With the
    default budget (plus connector repeatability and standards' tolerances the bench
    does not have) every point is covered."""
    shares, default = [], []
    for device in ("cable-1m", "bandpass-2g45", "attenuator-10db"):
        for seed in range(1, 5):
            bench, cal = _bench_calset(method, seed, device)
            bench.connect("device")
            sweep = cal.correct(Sweep(SIM_F, bench.sweep(SIM_F, **SIM_SWEEP)))
            truth = bench.truth(SIM_F)
            tracking = np.abs(cal.model.reflection["S11"].reflection_tracking)
            noise = noise_sigma(-10.0, 1e3, 1) * np.sqrt(2) / tracking
            only = DecisionRule(budget=Budget(load_error=0, phase_error_deg=0, repeatability=0,
                                              drift_per_hour=0, noise=noise), noise_auto=False)
            unc = sweep_uncertainty(sweep, cal, KIT, only)
            assert unc.unavailable is None and set(unc.transmission) == {"S21", "S12"}
            shares.append(_coverage(sweep, unc, truth))
            if seed == 1:
                default.append(_coverage(sweep, sweep_uncertainty(sweep, cal, KIT), truth))
    assert 0.935 <= np.mean(shares) <= 0.965, shares
    assert min(default) >= 0.95


def _cable_plan(tmp_path: Path, **changes: object) -> Path:
    data = yaml.safe_load((ROOT / "configs" / "plans" / "cable-assembly.yaml").read_text())
    data["stimulus"]["points"] = SIM_F.size
    data.update(output={"dir": str(tmp_path / "out")}, **changes)
    path = tmp_path / "plans" / "cable-assembly.yaml"
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(yaml.safe_dump(data))
    return path


def _band_labels(fig) -> set[str]:
    return {str(c.get_label()) for ax in fig.axes for c in ax.collections}


def test_guided_calibration_and_run_carry_u_for_all_four(tmp_path: Path,
                                                          capsys: pytest.CaptureFixture) -> None:
    """A real full two-port calibration (guided, the simulator's standard switch, noise
    on) and ``sweepd run`` of the cable: the JSON holds U of all four parameters (schema
    checked), the Touchstone comments summarise them, the truth lies within U at every
    point (1.0 when written: the default budget is wider than the bench's noise).
    Guarded acceptance of a |S21| mask whose limit is the measured worst value is
    indeterminate (exit 3), live and offline (``sweepd check --plan`` reads U back), and
    the plot shades |S21| ± U."""
    plan = _cable_plan(tmp_path, checks=[{"insertion_loss": {"band": ["10 MHz", "6 GHz"],
                                                             "at_most": "2.5 dB"}}])
    with SimServer(personality="generic", time_scale=0.0, noise=True, seed=3) as sim:
        sim.bench.set_device("cable-1m")
        outcome = calibrate(load_plan(plan), Options(resource=sim.tcp_resource,
                                                     prompt="switch"), stdout=io.StringIO())
        assert outcome.exit_code == 0
        sim.bench.connect("device")
        assert main(["run", str(plan), "--resource", sim.tcp_resource, "--json"]) == 0
        summary = json.loads(capsys.readouterr().out)
        truth = sim.bench.truth(SIM_F)
        validate(summary, "capture")
        block = summary["uncertainty"]
        assert block["available"] and set(block["parameters"]) == set(INDEX)
        assert block["parameters"]["S21"]["quantity"] == "s21_abs"
        assert "max_load_match_bias" not in block["parameters"]["S21"]
        capture = Path(summary["capture"]["touchstone"])
        ts = read_touchstone(capture)
        sweep = Sweep(ts.freq_hz, ts.data)
        unc = from_summary(sweep, capture)
        assert set(unc.reflection) == {"S11", "S22"} and set(unc.transmission) == {"S21", "S12"}
        assert _coverage(sweep, unc, truth) >= 0.95
        comments = [c.strip() for c in ts.comments]
        for p in INDEX:
            assert any(c.startswith(f"sweepd uncertainty (k=2) |{p}|: max U") for c in comments)

        worst = float(np.min(20 * np.log10(np.abs(ts.data[:, 1, 0]))))
        mask = tmp_path / "jumper-s21.yaml"
        mask.write_text(yaml.safe_dump({
            "name": "jumper-s21", "quantity": "magnitude_db",
            "segments": [{"name": "insertion", "parameter": "S21", "from": "10 MHz",
                          "to": "6 GHz", "lower": f"{worst - 1e-6:.7f} dB"}]}))
        guarded = _cable_plan(tmp_path, checks=[{"mask": str(mask)}],
                              decision={"rule": "guarded"})
        code = main(["run", str(guarded), "--resource", sim.tcp_resource, "--json"])
        summary = json.loads(capsys.readouterr().out)
        assert (code, summary["verdict"]) == (3, "indeterminate"), summary["checks"]
    capture = Path(summary["capture"]["touchstone"])
    assert main(["check", str(capture), "--plan", str(guarded), "--json"]) == 3
    assert json.loads(capsys.readouterr().out)["verdict"] == "indeterminate"
    ts = read_touchstone(capture)
    shown = attach_from_summary(Sweep(ts.freq_hz, ts.data), capture)
    fig = render(shown)
    assert "S21 uncertainty U (k=2)" in _band_labels(fig)
    (ax,) = [a for a in fig.axes if "S21 uncertainty U (k=2)" in
             {str(c.get_label()) for c in a.collections}]
    band = next(c for c in ax.collections if c.get_label() == "S21 uncertainty U (k=2)")
    line = next(ln for ln in ax.lines if ln.get_label() == "|S21| (dB)")
    assert line.get_zorder() > band.get_zorder()  # the trace stays visible over its band
    assert main(["plot", str(capture), "-o", str(tmp_path / "cable.png")]) == 0


def _without(cal: CalSet, *keys: str) -> CalSet:
    return replace(cal, raw={k: v for k, v in cal.raw.items() if k not in keys})


def test_missing_pieces_give_a_one_line_reason() -> None:
    """A cal set without what the model needs says so in one line (no traceback, no
    points); a one-port sweep corrected by a two-port cal set gets port 1's model."""
    bench, cal = _bench_calset(DEFINED, 2, "attenuator-10db")
    bench.connect("device")
    raw = Sweep(SIM_F, bench.sweep(SIM_F, **SIM_SWEEP))
    sweep = cal.correct(raw)
    no_thru = sweep_uncertainty(sweep, _without(cal, "thru.S21", "thru.S12"), KIT)
    assert no_thru.unavailable == ("the cal set holds no raw reading 'thru.S21' (the model "
                                   "solves its two-port calibration again from the readings)")
    assert not no_thru.reflection and not no_thru.transmission
    assert no_thru.comment_lines() == [f"sweepd uncertainty: not available ({no_thru.unavailable})"]
    _, unknown = _bench_calset(UNKNOWN, 2, "attenuator-10db")
    no_switch = sweep_uncertainty(unknown.correct(raw), _without(unknown, *SWITCH), KIT)
    assert no_switch.unavailable is not None and "'switch.forward'" in no_switch.unavailable
    terms = unknown.model.flat_terms()
    terms["S21.transmission_tracking"] = terms["S21.transmission_tracking"] * 1.01
    odd = replace(unknown, model=ErrorModel.from_flat(UNKNOWN, SIM_F, terms))
    broken = sweep_uncertainty(odd.correct(raw), odd, KIT)
    assert broken.unavailable == ("the cal set's 12 terms do not obey the 8-term relation its "
                                  "two-port-unknown-thru method gives them")
    no_port2 = sweep_uncertainty(sweep, _without(cal, "load.S22"), KIT)
    assert "'load.S22'" in (no_port2.unavailable or "")
    for unc in (no_thru, no_switch, broken, no_port2):
        assert "\n" not in unc.unavailable and unc.to_dict()["available"] is False
    one_port = Sweep(SIM_F, raw.s[:, :1, :1])
    unc = sweep_uncertainty(cal.correct(one_port), cal, KIT)
    assert unc.unavailable is None and set(unc.reflection) == {"S11"} and not unc.transmission


def test_the_json_block_round_trips_through_from_summary(tmp_path: Path) -> None:
    """U of S21 near zero transmission (stop band): the stored near-zero flags and U come
    back as they were written, and the guarded interval of |S21| dB is open below."""
    setup = _setup(DEFINED, "near-reflective stop band")
    reflection, transmission = full_two_port_uncertainty(setup, BUDGETS["defaults, 2 h"])
    sweep = Sweep(F, DEVICES["near-reflective stop band"])
    unc = SweepUncertainty(F, reflection, BUDGETS["defaults, 2 h"], transmission=transmission)
    block = unc.to_dict()
    assert block["parameters"]["S21"]["points_near_zero"] == F.size
    ts = tmp_path / "stopband.s2p"
    ts.with_suffix(".json").write_text(json.dumps({"uncertainty": block}))
    back = from_summary(sweep, ts)
    for p in ("S21", "S12"):
        assert np.allclose(back.transmission[p].expanded, transmission[p].expanded, rtol=1e-12)
        assert np.array_equal(back.transmission[p].near_match, transmission[p].near_match)
    lo, hi = back.interval("S21", "magnitude_db")
    assert np.all(np.isneginf(lo))  # |S21| - U < 0: no lower end
    assert np.allclose(hi, 20 * np.log10(np.abs(sweep.param("S21")) + transmission["S21"].expanded))
    assert any(line.startswith("sweepd uncertainty (k=2) |S12|") and "load match corrected"
               in line for line in unc.comment_lines())


def test_insertion_and_return_loss_checks_take_the_guard_band() -> None:
    """The two-port limits under guarded acceptance (ILAC-G8:09/2019): an insertion loss
    limit at the measured worst value is indeterminate, 1 dB away it passes or fails;
    a return loss limit that the matched ports meet by less than U is indeterminate, and
    the verdict says so for each port."""
    setup = _setup(DEFINED, "matched 6 dB attenuator")
    budget = BUDGETS["defaults, 2 h"]
    reflection, transmission = full_two_port_uncertainty(setup, budget)
    sweep = Sweep(F, DEVICES["matched 6 dB attenuator"])
    unc = SweepUncertainty(F, reflection, budget, transmission=transmission)
    rule = DecisionRule(rule="guarded")
    worst = float(np.max(-20 * np.log10(np.abs(sweep.param("S21")))))
    band = (float(F[0]), float(F[-1]))
    verdicts = [evaluate_checks([InsertionLossCheck(*band, worst + d)], sweep, decision=rule,
                                uncertainty=unc, metrics=False).results[0].verdict
                for d in (1e-9, 1.0, -1.0)]
    assert verdicts == ["indeterminate", "pass", "fail"]
    rl = evaluate_checks([ReturnLossCheck(*band, 40.0)], sweep, decision=rule, uncertainty=unc,
                         metrics=False).results[0]
    assert rl.verdict == "indeterminate"
    assert set(rl.details["guarded"]) == {"S11", "S22"}
    assert evaluate_checks([ReturnLossCheck(*band, 40.0)], sweep, metrics=False
                           ).results[0].verdict == "pass"


def test_a_model_that_breaks_down_never_stops_the_capture(monkeypatch: pytest.MonkeyPatch
                                                          ) -> None:
    """A singular solve or a non-finite U inside the model becomes a one-line
    ``unavailable`` (the capture goes on and is stored), never a traceback."""
    import acquire.uncertainty.capture as model  # where the capture looks the model up

    bench, cal = _bench_calset(DEFINED, 4, "cable-1m")
    bench.connect("device")
    sweep = cal.correct(Sweep(SIM_F, bench.sweep(SIM_F, **SIM_SWEEP)))
    real = model.full_two_port_uncertainty

    def singular(setup, budget):
        raise np.linalg.LinAlgError("Singular matrix\nmore")

    monkeypatch.setattr(model, "full_two_port_uncertainty", singular)
    assert sweep_uncertainty(sweep, cal, KIT).unavailable == (
        "the two-port calibration cannot be modelled: Singular matrix")

    def not_finite(setup, budget):
        reflection, transmission = real(setup, budget)
        u = transmission["S12"].expanded.copy()
        u[7] = np.nan
        return reflection, {**transmission, "S12": replace(transmission["S12"], expanded=u)}

    monkeypatch.setattr(model, "full_two_port_uncertainty", not_finite)
    assert sweep_uncertainty(sweep, cal, KIT).unavailable == (
        "the uncertainty of S12 is not finite at 219.65 MHz")
