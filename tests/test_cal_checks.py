"""Plausibility checks on raw standard readings and on solved terms.

Raw data are synthesised through the one-port error model (R. B. Marks, 50th ARFTG
Digest, 1997). The limits (balance 6 dB, opposition 45°, load residual 0.5) are bounds
derived from that model for raw source match up to 0.3 (5.4 dB and 33.4°); the Monte Carlo
cases repeat the reference trial: |e00|, |e11| ≤ 0.3, 0.1 ≤ |e10e01| ≤ 1, random delays,
10 MHz–6 GHz. Term limits are common practice.
"""

from __future__ import annotations

import numpy as np
import pytest

from acquire.calibration import CheckLimits, OnePortTerms, check_raw, check_terms, load_kit
from acquire.calibration.model import solve_one_port

KIT = load_kit("generic-sma-50")
F = np.linspace(10e6, 6e9, 201)
W = 2 * np.pi * F
MODELS = {k: KIT.reflection(k, F) for k in ("open", "short", "load")}
ACTUAL = {**MODELS, "bare": np.ones(F.size, complex)}
STEPS = ("open", "short", "load")
BOX = OnePortTerms(0.05 * np.exp(-1j * W * 0.3e-9), 0.15 * np.exp(1j - 1j * W * 0.5e-9),
                   0.7 * np.exp(-1j * W * 3e-9))


def _random_box(rng: np.random.Generator) -> OnePortTerms:
    def phase() -> complex:
        return np.exp(1j * rng.uniform(0, 2 * np.pi))

    return OnePortTerms(
        rng.uniform(0, 0.3) * phase() * np.exp(-1j * W * rng.uniform(0, 1e-9)),
        rng.uniform(0, 0.3) * phase() * np.exp(-1j * W * rng.uniform(0, 1e-9)),
        rng.uniform(0.1, 1.0) * phase() * np.exp(-1j * W * rng.uniform(0, 10e-9)),
    )


def _raw(box: OnePortTerms, connected: tuple[str, ...]) -> dict[str, np.ndarray]:
    return {step: box.embed(ACTUAL[std]) for step, std in zip(STEPS, connected, strict=True)}


WRONG = {
    "open on the short step": ("open", "open", "load"),
    "load on the open step": ("load", "short", "load"),
    "load on the short step": ("open", "load", "load"),
    "short on the load step": ("open", "short", "short"),
    "open on the load step": ("open", "short", "open"),
    "short on both steps": ("short", "short", "load"),
    "bare port on the load step": ("open", "short", "bare"),
}


def test_monte_carlo_right_standards_pass_wrong_ones_trip() -> None:
    rng = np.random.default_rng(2024)
    worst = np.zeros(3)
    for _ in range(100):
        box = _random_box(rng)
        good = check_raw(F, _raw(box, STEPS), MODELS)
        assert good.passed, good.messages()
        fig = good.figures
        worst = np.maximum(worst, [fig["max_balance_db"], fig["max_opposition_deg"],
                                   fig["max_load_residual"]])
        for case, connected in WRONG.items():
            result = check_raw(F, _raw(box, connected), MODELS)
            assert not result.passed, case
            wrong_steps = {s for s, c in zip(STEPS, connected, strict=True) if c != s}
            assert wrong_steps <= set(result.repeat_steps()), (case, result.messages())
    # the reference trial stayed within 5.5 dB, 34°, q = 0.30 for right standards
    assert worst[0] < 5.5 and worst[1] < 34.0 and worst[2] < 0.31


def test_duplicate_reading_names_the_steps_and_the_likely_wrong_one() -> None:
    result = check_raw(F, _raw(BOX, ("load", "short", "load")), MODELS)
    (finding,) = result.findings
    assert finding.check == "same-reading" and finding.fraction == 1.0
    assert finding.message == (
        "the OPEN and LOAD steps read the same at 100 % of the points: the same standard was "
        "connected twice (the OPEN step looks like a LOAD); repeat both steps")
    result = check_raw(F, _raw(BOX, ("open", "short", "short")), MODELS)
    assert "(the LOAD step looks like an OPEN or SHORT)" in result.findings[0].message
    result = check_raw(F, _raw(BOX, ("open", "open", "load")), MODELS)
    assert result.findings[0].message.startswith("the OPEN and SHORT steps read the same")


def test_bare_port_on_the_load_step_reads_as_high_reflection() -> None:
    result = check_raw(F, _raw(BOX, ("open", "short", "bare")), MODELS)
    load = [f for f in result.findings if f.check == "load-residual"]
    assert load and load[0].steps == ("load",)
    assert "the LOAD step shows a high reflection" in load[0].message
    assert "loose connector, bare port or wrong standard" in load[0].message
    assert load[0].fraction > 0.5 and load[0].worst > 0.5


def test_swapped_load_and_open_are_identified_without_a_previous_cal() -> None:
    result = check_raw(F, _raw(BOX, ("load", "short", "open")), MODELS)
    first = result.findings[0]
    assert first.check == "identity"
    assert first.message.startswith("the standard on the OPEN step looks like a LOAD")
    assert set(first.steps) == {"open", "short", "load"}


def test_open_short_swap_passes_raw_checks_but_not_the_last_cal() -> None:
    """A swap over the whole sweep fits the model (e11 → ≈−e11, e10e01 → ≈−e10e01); it is
    caught against the last calibration of the same setup (≈180° tracking jump)."""
    swapped = _raw(BOX, ("short", "open", "load"))
    assert check_raw(F, swapped, MODELS).passed
    result = check_raw(F, swapped, MODELS, previous=BOX)
    assert not result.passed
    assert result.findings[0].message == ("open and short look swapped compared with the last "
                                          "calibration: repeat the OPEN and SHORT steps")
    fit = solve_one_port(np.stack([swapped[s] for s in STEPS], 1),
                         np.stack([MODELS[s] for s in STEPS], 1))
    terms = check_terms(F, fit.terms, previous=BOX)
    (finding,) = [f for f in terms.findings if f.check == "swapped"]
    assert finding.steps == ("open", "short") and "turned by 180°" in finding.message
    right = solve_one_port(np.stack([BOX.embed(MODELS[s]) for s in STEPS], 1),
                           np.stack([MODELS[s] for s in STEPS], 1))
    assert check_terms(F, right.terms, previous=BOX).passed


def test_single_step_against_the_last_cal() -> None:
    """Per step, as the guided procedure runs: the OPEN step holding a short is named."""
    raw = {"open": BOX.embed(MODELS["short"])}
    result = check_raw(F, raw, MODELS, previous=BOX)
    assert result.messages() == ["the standard on the OPEN step looks like a SHORT (compared "
                                 "with the last calibration): repeat it"]
    assert check_raw(F, {"open": BOX.embed(MODELS["open"])}, MODELS, previous=BOX).passed
    assert check_raw(F, {"open": BOX.embed(MODELS["short"])}, MODELS).passed  # nothing to compare
    loose = {"load": BOX.embed(0.6 * np.exp(1j * W * 1e-10))}
    (finding,) = check_raw(F, loose, MODELS, previous=BOX).findings
    assert finding.check == "previous" and finding.steps == ("load",)


def test_raw_sanity() -> None:
    bad = BOX.embed(MODELS["open"]).copy()
    bad[17] = np.nan
    (finding,) = check_raw(F, {"open": bad}, MODELS).findings
    assert finding.message.startswith("the OPEN step returned invalid numbers (first at")
    huge = np.full(F.size, 50.0 + 0j)
    (finding,) = check_raw(F, {"short": huge}, MODELS).findings
    assert "not a plausible reflection" in finding.message


def test_fraction_rule_allows_about_one_percent() -> None:
    raw = _raw(BOX, STEPS)
    raw["load"] = raw["load"].copy()
    raw["load"][:2] = BOX.embed(ACTUAL["bare"])[:2]  # 2 of 201 points (1.0 %) hit by a glitch
    assert check_raw(F, raw, MODELS).passed
    raw["load"][:4] = BOX.embed(ACTUAL["bare"])[:4]  # 2 %
    assert not check_raw(F, raw, MODELS).passed
    assert check_raw(F, raw, MODELS, limits=CheckLimits(max_fraction=0.05)).passed


def test_term_checks() -> None:
    bad_dir = OnePortTerms(0.7 + 0 * F, BOX.source_match, BOX.reflection_tracking)
    (finding,) = check_terms(F, bad_dir).findings
    assert finding.check == "directivity" and finding.steps == ("load",)
    bad_src = OnePortTerms(BOX.directivity, 0.6 + 0 * F, BOX.reflection_tracking)
    assert check_terms(F, bad_src).repeat_steps() == ("open", "short")
    weaker = OnePortTerms(BOX.directivity, BOX.source_match, BOX.reflection_tracking * 0.6)
    result = check_terms(F, weaker, previous=BOX)
    (finding,) = result.findings
    assert finding.message.startswith("reflection tracking changed by 4.4 dB since the last")
    glitch = BOX.reflection_tracking.copy()
    glitch[100:110] *= np.exp(1j * 1.2)
    result = check_terms(F, OnePortTerms(BOX.directivity, BOX.source_match, glitch))
    assert [f.check for f in result.findings] == ["tracking-phase"]
    assert result.figures["tracking_round_trip_delay_s"] == pytest.approx(3e-9, rel=0.05)
    assert check_terms(F, BOX).passed
