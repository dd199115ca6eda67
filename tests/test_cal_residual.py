"""Residual errors after calibration and check-standard verification.

Sources: the first-order residual-error bound |ΔΓ| ≲ δ_D + δ_T·|Γ| + δ_S·|Γ|² and the
check-standard comparison of EURAMET cg-12, "Guidelines on the Evaluation of Vector
Network Analysers", v3.0, 2018 (worked numbers computed from those formulas); return-loss
reading error from |Γ_meas| = |Γ|(1 ± x), x = 10^(−margin/20).
"""

from __future__ import annotations

import numpy as np
import pytest

from acquire.calibration import (
    OnePortTerms,
    ResidualEstimate,
    check_tolerance,
    estimate_residuals,
    load_kit,
    return_loss_error_range,
    solve,
    verify_check_standard,
)

KIT = load_kit("generic-sma-50")
F = np.linspace(10e6, 6e9, 201)
W = 2 * np.pi * F
MODELS = {k: KIT.reflection(k, F) for k in ("open", "short", "load")}
BOX = OnePortTerms(0.05 * np.exp(-1j * W * 0.3e-9), 0.15 * np.exp(1j - 1j * W * 0.5e-9),
                   0.7 * np.exp(-1j * W * 3e-9))


def test_reading_error_example() -> None:
    """δ_D = 0.01 (−40 dB), δ_S = 0.0178 (−35 dB), δ_T = 0.05 dB: 0.0108, 0.0139, 0.0296."""
    est = ResidualEstimate.from_db(-40.0, -35.0, 0.05)
    assert np.allclose(est.reading_error([0.1, 1 / 3, 0.9]), [0.0108, 0.0139, 0.0296], atol=5e-5)


@pytest.mark.parametrize(("margin", "low", "high"), [
    (6, -3.53, 6.04), (10, -2.39, 3.30), (15, -1.42, 1.70), (20, -0.83, 0.92), (30, -0.27, 0.28),
])
def test_return_loss_error_range(margin: float, low: float, high: float) -> None:
    got = return_loss_error_range(margin)
    assert got == pytest.approx((low, high), abs=0.006)


def test_effective_directivity_equals_the_load_error() -> None:
    """First order: effective directivity ≈ |Γ_L,actual − Γ_L,model| (EURAMET cg-12)."""
    est = estimate_residuals(F, MODELS, load_error=0.01, phase_error_deg=0.0)
    assert est.directivity == pytest.approx(0.01, rel=0.01)
    assert est.tracking < 1e-3  # a load error hardly touches tracking
    lines = est.lines()
    assert lines[0] == "effective directivity -40.0 dB"
    assert "load error ≤ -40 dB" in lines[-1]


def test_estimate_bounds_real_corrections() -> None:
    """Calibrate with standards that deviate from their models within the stated limits;
    corrected devices stay within the first-order bound (plus a little second order).
    With the deviations at their limits the worst case reaches about 98 % of the bound."""
    est = estimate_residuals(F, MODELS, load_error=0.01, phase_error_deg=1.0)
    rng = np.random.default_rng(8)
    for _ in range(20):
        actual = {
            "open": MODELS["open"] * np.exp(1j * np.radians(rng.choice([-1.0, 1.0]))),
            "short": MODELS["short"] * np.exp(1j * np.radians(rng.choice([-1.0, 1.0]))),
            "load": MODELS["load"] + 0.01 * np.exp(1j * rng.uniform(0, 2 * np.pi)),
        }
        raw = {f"{k}.S11": BOX.embed(v) for k, v in actual.items()}
        model = solve("one-port", F, raw, KIT).model.reflection["S11"]
        for mag in (0.1, 1 / 3, 0.9):
            dut = mag * np.exp(1j * rng.uniform(0, 2 * np.pi, F.size))
            err = np.abs(model.correct(BOX.embed(dut)) - dut)
            assert err.max() <= est.reading_error(mag) * 1.05


def test_check_standard_passes_and_fails_with_plain_message() -> None:
    """A 25 Ω mismatch (|Γ| = 1/3) measured after calibration, against its reference."""
    ref = np.full(F.size, -1 / 3 + 0j)
    est = estimate_residuals(F, MODELS)
    tol = check_tolerance(ref, est, repeatability=0.002)
    raw = {f"{k}.S11": BOX.embed(v) for k, v in MODELS.items()}
    good = solve("one-port", F, raw, KIT).model.reflection["S11"]
    result = verify_check_standard(F, good.correct(BOX.embed(ref)), ref, tol, name="check-25")
    assert result.passed and result.worst_error < 1e-12
    assert result.message.startswith("check-25 agrees with its reference within 0.0000")
    raw["load.S11"] = BOX.embed(MODELS["load"] + 0.1)  # a damaged load: 20 dB return loss
    bad = solve("one-port", F, raw, KIT).model.reflection["S11"]
    result = verify_check_standard(F, bad.correct(BOX.embed(ref)), ref, tol, name="check-25")
    assert not result.passed and result.fraction_over == 1.0
    assert result.message.startswith("check-25 is off by 0.")
    assert result.message.endswith("the calibration or the check connection is bad; "
                                   "repeat the calibration")
    assert result.worst_error > result.allowed
