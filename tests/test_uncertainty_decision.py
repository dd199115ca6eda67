"""Decision rules: simple and guarded acceptance, the plan's ``decision:`` section.

Source: ILAC-G8:09/2019 (guarded acceptance with w = U: accept only inside the limit by
at least w, reject only outside by at least w, in between no statement) and
ISO 14253-1:2017 (the same zones for specifications); hand-computed SWR numbers.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from acquire.check_parse import parse_checks
from acquire.checks import evaluate_checks
from acquire.errors import PlanError
from acquire.sweep import Sweep
from acquire.uncertainty.budget import Budget
from acquire.uncertainty.capture import SweepUncertainty, unavailable
from acquire.uncertainty.decision import (
    FAIL,
    INDETERMINATE,
    PASS,
    DecisionRule,
    parse_decision,
    point_states,
)
from acquire.uncertainty.propagate import reflection_uncertainty
from acquire.yamlfile import Node
from tests.schema_support import validate

F = np.linspace(2.40e9, 2.50e9, 101)
IDEAL = {"open": np.array(1 + 0j), "short": np.array(-1 + 0j), "load": np.array(0j)}
# drift alone, RMS 0.005·√2 → σ 0.005 per part → U = 0.01 (k = 2) at every |Γ| ≥ 0.0122
U_001 = Budget(load_error=0.0, phase_error_deg=0.0, repeatability=0.0, noise=0.0,
               drift_per_hour=0.005 * np.sqrt(2), cal_age_s=3600.0)
GUARDED = DecisionRule("guarded", 1.0, U_001)


def node(value: object) -> Node:
    return Node(value, "plan lines/patch.yaml", "decision", PlanError)


def flat(gamma_abs: float) -> tuple[Sweep, SweepUncertainty]:
    g = gamma_abs * np.exp(1j * np.linspace(0, 3, F.size))
    sweep = Sweep(F, g.reshape(-1, 1, 1))
    return sweep, SweepUncertainty(F, {"S11": reflection_uncertainty(g, IDEAL, U_001)}, U_001)


WORST = [{"worst_swr": {"band": ["2.40 GHz", "2.50 GHz"], "at_most": 1.8}}]


@pytest.mark.parametrize(("gamma", "simple", "guarded"), [
    (0.27, "pass", "pass"),            # SWR(0.28) = 1.778 <= 1.8: inside by more than U
    (0.28, "pass", "indeterminate"),   # SWR 1.778 passes, but SWR(0.29) = 1.817 > 1.8
    (0.29, "fail", "indeterminate"),   # SWR 1.817 fails, but SWR(0.28) = 1.778 < 1.8
    (0.30, "fail", "fail"),            # SWR(0.29) = 1.817 > 1.8: outside by more than U
])
def test_worst_swr_zones(gamma: float, simple: str, guarded: str) -> None:
    """Limit SWR 1.8 is |Γ| = 0.8/2.8 = 0.2857; U = 0.01 in |Γ|."""
    sweep, unc = flat(gamma)
    checks = parse_checks(Node(WORST, "plan p.yaml", "checks", PlanError))
    assert evaluate_checks(checks, sweep, uncertainty=unc).verdict == simple
    verdict = evaluate_checks(checks, sweep, decision=GUARDED, uncertainty=unc)
    assert verdict.verdict == guarded
    assert verdict.exit_code == {"pass": 0, "fail": 1, "indeterminate": 3}[guarded]
    data = validate(verdict.to_json(), "verdict")
    assert data["decision"]["rule"] == "guarded"
    guard = data["checks"][0]["guarded"]
    assert guard["verdict"] == guarded
    assert (guard["positions_indeterminate"] > 0) == (guarded == "indeterminate")
    # guarded margin = limit − SWR(|Γ| + U)
    assert guard["worst_guarded_margin"] == pytest.approx(1.8 - (1 + gamma + 0.01) /
                                                          (1 - gamma - 0.01), rel=1e-9)


def test_mask_segments_return_loss_guarded() -> None:
    """A 10 dB return-loss floor (|Γ| ≤ 0.3162) with |Γ| = 0.31: simple passes (10.17 dB),
    guarded is indeterminate (|Γ| + U = 0.32 reads 9.90 dB); the JSON says why."""
    sweep, unc = flat(0.31)
    mask = {"name": "floor", "segments": [{"from": "2.40 GHz", "to": "2.50 GHz",
                                           "quantity": "return_loss", "lower": "10 dB"}]}
    from acquire.checks import MaskCheck
    from acquire.masks import parse_mask

    check = MaskCheck(parse_mask(Node(mask, "mask floor.yaml"), default_name="floor",
                                 source="floor.yaml"))
    assert evaluate_checks([check], sweep).verdict == "pass"
    verdict = evaluate_checks([check], sweep, decision=GUARDED, uncertainty=unc)
    assert verdict.verdict == "indeterminate"
    seg = json.loads(verdict.to_json())["checks"][0]["segments"][0]
    assert seg["verdict"] == "pass" and seg["guarded"]["verdict"] == "indeterminate"
    assert seg["guarded"]["indeterminate_ranges_hz"] == [[2.40e9, 2.50e9]]
    assert "101 positions within the guard band" in verdict.summary_line()
    assert "decision rule: guarded acceptance" in verdict.comment_lines()[1]


def test_guarded_without_uncertainty_is_an_error_naming_the_reason() -> None:
    sweep, _ = flat(0.1)
    checks = parse_checks(Node(WORST, "plan p.yaml", "checks", PlanError))
    verdict = evaluate_checks(checks, sweep, decision=GUARDED,
                              uncertainty=unavailable(sweep, "the sweep is uncorrected"))
    assert verdict.verdict == "error" and verdict.exit_code == 2
    msg = verdict.results[0].message
    assert "guarded acceptance needs the uncertainty of S11" in msg
    assert "the sweep is uncorrected" in msg and "\n" not in msg


def test_quantities_without_a_model_keep_simple_acceptance() -> None:
    """Phase has no uncertainty model here: the segment is judged simply and says so;
    resonance checks have no guard band and say so too."""
    sweep, unc = flat(0.5)
    mask = {"name": "ph", "segments": [{"from": "2.40 GHz", "to": "2.50 GHz",
                                        "quantity": "phase", "upper": "179 deg"}]}
    from acquire.checks import MaskCheck
    from acquire.masks import parse_mask

    check = MaskCheck(parse_mask(Node(mask, "mask ph.yaml"), default_name="ph", source="x"))
    res = parse_checks(Node([{"resonance": {"within": ["2.40 GHz", "2.50 GHz"]}}], "plan p",
                            "checks", PlanError))
    verdict = evaluate_checks([check, *res], sweep, decision=GUARDED, uncertainty=unc)
    d = json.loads(verdict.to_json())
    assert d["checks"][0]["segments"][0]["guarded"]["rule"] == "simple"
    assert "no uncertainty model" in d["checks"][0]["segments"][0]["guarded"]["note"]
    assert d["checks"][1]["decision"]["rule"] == "simple"


def test_point_states_lower_and_upper() -> None:
    lo, hi = np.array([0.0, 0.9, 1.1, 2.1]), np.array([0.8, 1.1, 1.9, 2.5])
    assert list(point_states(lo, hi, np.full(4, 2.0), None)) == [PASS, PASS, PASS, FAIL]
    assert list(point_states(lo, hi, None, np.full(4, 1.0))) == [FAIL, INDETERMINATE, PASS,
                                                                 PASS]


def test_decision_section_defaults_and_values() -> None:
    assert not parse_decision(node(None)).guarded
    rule = parse_decision(node({"rule": "guarded", "guard": 0.5, "uncertainty": {
        "load_error": "-40 dB", "phase_error": "2 deg", "repeatability": 0.003,
        "noise": "-70 dB", "drift_per_hour": 0.001}}))
    assert rule.guarded and rule.guard == 0.5 and not rule.noise_auto
    b = rule.budget
    assert b.load_error == pytest.approx(0.01) and b.phase_error_deg == 2.0
    assert b.repeatability == 0.003 and b.noise == pytest.approx(10 ** -3.5)
    assert rule.to_dict()["statement"] == "guarded acceptance, guard band 0.5 x U (k = 2)"


@pytest.mark.parametrize(("value", "message"), [
    ({"rule": "strict"}, "decision.rule: must be one of simple, guarded, got 'strict'"),
    ({"guard": 5}, "decision.guard: must be from 0 to 3, got 5"),
    ({"uncertainty": {"load_error": "6 dB"}},
     "decision.uncertainty.load_error: must be a level at or below 0 dB, got '6 dB'"),
    ({"uncertainty": {"repetability": 0.1}}, "unknown key 'repetability' (did you mean "
                                             "'repeatability'?)"),
    ({"uncertainty": {"noise": 2}}, "decision.uncertainty.noise: must be a linear level from 0 "
                                    "to 1 or a dB level such as '-40 dB', got 2"),
])
def test_decision_section_errors_are_one_line(value: object, message: str) -> None:
    with pytest.raises(PlanError) as err:
        parse_decision(node(value))
    assert message in str(err.value) and "\n" not in str(err.value)
    assert str(err.value).startswith("plan lines/patch.yaml: decision")


def _rlc_band(rho: float, f0: float = 2.45e9, r: float = 45.0, q: float = 12.0) -> float:
    """Closed-form width where |Γ| <= rho of a series RLC (|z − Z0| = rho·|z + Z0| solved
    for the reactance x, then ωL − 1/(ωC) = ±x; Pozar 6.1)."""
    ind = q * r / (2 * np.pi * f0)
    x = np.sqrt(((50 + r) ** 2 * rho**2 - (50 - r) ** 2) / (1 - rho**2))
    return float(x / (2 * np.pi * ind))  # f_hi − f_lo = x / (2π L)


@pytest.mark.parametrize(("need_mhz", "want"), [(145, "pass"), (150, "indeterminate"),
                                                (156, "fail")])
def test_bandwidth_guarded(need_mhz: float, want: str) -> None:
    """SWR-2 band (|Γ| <= 1/3) of a series RLC antenna (45 ohm, Q 12, 2.45 GHz) with
    U = 0.01: surely below where |Γ| + U <= 1/3, possibly where |Γ| − U <= 1/3; the
    closed form gives 145.31 MHz and 155.70 MHz (150.48 MHz at |Γ| = 1/3 itself, where
    simple acceptance would pass 150 MHz); the interpolated crossings on 2001 points
    agree within 0.2 MHz."""
    f = np.linspace(2.3e9, 2.6e9, 2001)
    ind = 12 * 45.0 / (2 * np.pi * 2.45e9)
    cap = 1 / ((2 * np.pi * 2.45e9) ** 2 * ind)
    w = 2 * np.pi * f
    z = 45.0 + 1j * (w * ind - 1 / (w * cap))
    g = (z - 50) / (z + 50)
    sweep = Sweep(f, g.reshape(-1, 1, 1))
    unc = SweepUncertainty(f, {"S11": reflection_uncertainty(g, IDEAL, U_001)}, U_001)
    checks = parse_checks(Node([{"bandwidth": {"below_swr": 2.0, "at_least": f"{need_mhz} MHz"}}],
                               "plan p", "checks", PlanError))
    verdict = evaluate_checks(checks, sweep, decision=GUARDED, uncertainty=unc)
    guard = verdict.results[0].details["guarded"]
    assert guard["sure_hz"] == pytest.approx(_rlc_band(1 / 3 - 0.01), abs=0.2e6)
    assert guard["possible_hz"] == pytest.approx(_rlc_band(1 / 3 + 0.01), abs=0.2e6)
    assert verdict.verdict == want


def test_s21_magnitude_segment_uses_the_transmission_uncertainty() -> None:
    """|S21| = 0.5 (−6.02 dB) with U = 0.01 in |S21|: a floor at −6.10 dB passes simply
    (0.08 dB inside) but is indeterminate guarded (20·log10(0.49) = −6.196 dB); a floor
    at −6.25 dB passes both ways (−6.196 dB is above it)."""
    from acquire.checks import MaskCheck
    from acquire.masks import parse_mask
    from acquire.uncertainty.transmission import TransmissionUncertainty

    s = np.zeros((F.size, 2, 2), complex)
    s[:, 1, 0] = s[:, 0, 1] = 0.5
    sweep = Sweep(F, s)
    n = F.size
    trans = TransmissionUncertainty(np.full(n, 0.5), np.full(n, 0.005), np.zeros(n),
                                    np.full(n, 0.01))
    unc = SweepUncertainty(F, {}, U_001, transmission={"S21": trans})
    for floor, simple, guarded in (("-6.10 dB", "pass", "indeterminate"),
                                   ("-6.25 dB", "pass", "pass")):
        mask = {"name": "pad", "parameter": "S21", "segments": [
            {"from": "2.40 GHz", "to": "2.50 GHz", "quantity": "magnitude_db", "lower": floor}]}
        check = MaskCheck(parse_mask(Node(mask, "mask pad.yaml"), default_name="pad",
                                     source="pad.yaml"))
        assert evaluate_checks([check], sweep).verdict == simple
        assert evaluate_checks([check], sweep, decision=GUARDED,
                               uncertainty=unc).verdict == guarded


def test_shipped_guarded_example_plan() -> None:
    from acquire.library import library_dir
    from acquire.plan import load_plan

    plan = load_plan(library_dir("plans") / "patch-line-guarded.yaml")
    assert plan.decision.guarded and plan.decision.guard == 1.0
    assert plan.decision.budget.load_error == pytest.approx(0.01) and plan.decision.noise_auto
