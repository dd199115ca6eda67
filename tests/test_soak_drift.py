"""Drift numbers of the soak: overlapping Allan deviation and deviation from a reference.

Allan deviation formulas and check values: W. J. Riley, Handbook of Frequency Stability
Analysis, NIST SP 1065 (2008), and IEEE Std 1139. Per-point deviation and SWR are checked
against scikit-rf (tests only) and the textbook definitions (Pozar, Microwave Engineering,
4th ed., ch. 2). Drifting devices come from the simulator's own device model, an
implementation independent of acquire.
"""

from __future__ import annotations

import numpy as np
import pytest

from acquire.soak.allan import adev_curve, octave_factors, overlapping_adev
from acquire.soak.drift import make_reference, measure_drift
from acquire.sweep import Sweep
from simulators.devices import make_device, shifted

SQRT2 = np.sqrt(2.0)


def adev_phase_form(y: np.ndarray, m: int, tau0: float) -> float:
    """NIST SP 1065 phase-data form: x = cumulative sum of y·τ0, N = M + 1 phase points,
    σ²(τ) = Σ_{i=1}^{N−2m} (x_{i+2m} − 2x_{i+m} + x_i)² / (2 (N − 2m) τ²)."""
    x = np.concatenate(([0.0], np.cumsum(y * tau0)))
    n = x.size
    tau = m * tau0
    second = x[2 * m:] - 2.0 * x[m:n - m] + x[: n - 2 * m]
    return float(np.sqrt(np.sum(second**2) / (2.0 * (n - 2 * m) * tau * tau)))


def adev_with_gaps_by_hand(y: np.ndarray, m: int) -> float:
    """Plain loops, one pair of averages at a time, skipping any that touch a gap."""
    total, terms = 0.0, 0
    for k in range(y.size - 2 * m + 1):
        a, b = y[k:k + m], y[k + m:k + 2 * m]
        if np.isnan(a).any() or np.isnan(b).any():
            continue
        total += (b.mean() - a.mean()) ** 2
        terms += 1
    return float(np.sqrt(total / (2 * terms)))


# -- Allan deviation -------------------------------------------------------------------------------
def test_nist_sp1065_check_values() -> None:
    # y = [1, 2, 4, 7, 11], τ0 = 1 s: σ(1 s) = sqrt(30/8), σ(2 s) = sqrt(13) (NIST SP 1065
    # overlapping estimator; the same numbers come from an independent library).
    y = [1, 2, 4, 7, 11]
    assert overlapping_adev(y, 1) == (pytest.approx(1.936492, abs=1e-6), 4)
    assert overlapping_adev(y, 2) == (pytest.approx(3.605551, abs=1e-6), 2)
    curve = adev_curve(y, 1.0, factors=[1, 2])
    assert [p.tau_s for p in curve] == [1.0, 2.0]


@pytest.mark.parametrize("m", [1, 2, 3, 8, 50])
def test_overlapping_adev_equals_the_phase_data_form(m: int) -> None:
    rng = np.random.default_rng(7)
    y = 2.45e9 + np.cumsum(rng.standard_normal(1000)) * 300.0  # random walk near 2.45 GHz
    ours, terms = overlapping_adev(y, m)
    assert terms == y.size - 2 * m + 1
    assert ours == pytest.approx(adev_phase_form(y - 2.45e9, m, 60.0), rel=1e-9)


def test_white_noise_falls_as_one_over_root_m() -> None:
    # NIST SP 1065: white noise σ = 1 gives σ(m·τ0) ≈ 1/√m; 200 000 samples of numpy
    # default_rng(0) give 0.3152 at m = 10 and 0.1008 at m = 100.
    y = np.random.default_rng(0).standard_normal(200_000)
    at10, _ = overlapping_adev(y, 10)
    at100, _ = overlapping_adev(y, 100)
    assert at10 == pytest.approx(0.3152, abs=5e-5)
    assert at100 == pytest.approx(0.1008, abs=5e-5)
    assert at10 == pytest.approx(1 / np.sqrt(10), rel=0.02)
    assert at100 == pytest.approx(1 / np.sqrt(100), rel=0.02)


def test_linear_drift_gives_d_tau_over_root_two() -> None:
    # NIST SP 1065: a linear drift D per second gives σ(τ) = D·τ/√2.
    # D = 1e-3 /s, τ0 = 10 s: 7.0711e-3 at 10 s, 4.2426e-1 at 600 s.
    tau0, rate = 10.0, 1e-3
    y = rate * tau0 * np.arange(400)
    assert overlapping_adev(y, 1)[0] == pytest.approx(7.0711e-3, rel=1e-4)
    assert overlapping_adev(y, 60)[0] == pytest.approx(4.2426e-1, rel=1e-4)


@pytest.mark.parametrize("m", [1, 2, 5])
def test_gaps_leave_out_exactly_the_terms_that_touch_them(m: int) -> None:
    rng = np.random.default_rng(3)
    y = rng.standard_normal(300)
    y[[10, 11, 57, 200]] = np.nan  # missed sweeps
    ours, terms = overlapping_adev(y, m)
    assert ours == pytest.approx(adev_with_gaps_by_hand(y, m), rel=1e-12)
    assert terms < y.size - 2 * m + 1


def test_octave_factors_stop_near_a_quarter() -> None:
    assert octave_factors(1) == []
    assert octave_factors(5) == [1]
    assert octave_factors(100) == [1, 2, 4, 8, 16]
    assert overlapping_adev([1.0, 2.0, 3.0], 2) == (pytest.approx(float("nan"), nan_ok=True), 0)


# -- drift of simulated devices --------------------------------------------------------------------
FREQ = np.linspace(2.30e9, 2.60e9, 2001)
# A series resonator seen directly: X = 0, and so the minimum |Γ|, at f0 (Pozar ch. 6).
DEVICE = make_device("resonator", f0_hz=2.45e9, q=30.0, r_ohm=40.0, topology="series")


def device_sweep(shift_hz: float) -> Sweep:
    return Sweep(FREQ, shifted(DEVICE, shift_hz).s(FREQ), (50.0,))


def track(shifts: np.ndarray) -> np.ndarray:
    ref = make_reference(device_sweep(0.0), "S11", (2.40e9, 2.50e9), "test")
    return np.array([measure_drift(ref, device_sweep(s))[0].resonance_shift_hz for s in shifts])


def test_linear_resonance_drift_is_tracked_and_its_allan_deviation_is_d_tau_over_root_two() -> None:
    tau0, rate = 60.0, 1000.0  # one sweep a minute, resonance rising 1 kHz/s
    truth = rate * tau0 * np.arange(120)
    seen = track(truth)
    # the parabola through the smallest bin refines to well under 1 % of the 150 kHz step
    np.testing.assert_allclose(seen, truth, atol=1.0e3)
    slope = np.polyfit(tau0 * np.arange(truth.size), seen, 1)[0]
    assert slope == pytest.approx(rate, rel=2e-3)
    for point in adev_curve(2.45e9 + seen, tau0):
        assert point.adev == pytest.approx(rate * point.tau_s / SQRT2, rel=0.02), point


def test_white_jitter_of_known_sigma_gives_sigma_over_root_m() -> None:
    sigma = 40e3
    jitter = np.random.default_rng(11).normal(0.0, sigma, 1500)
    seen = track(jitter)
    assert np.std(seen - jitter) < 1.5e3  # the estimator follows each sweep
    for m, tolerance in ((1, 0.06), (4, 0.10), (16, 0.20)):  # statistical tolerances
        adev, _ = overlapping_adev(seen, m)
        assert adev == pytest.approx(sigma / np.sqrt(m), rel=tolerance), m


def test_per_point_deviation_and_swr_match_scikit_rf() -> None:
    import skrf as rf
    ref_sweep, now_sweep = device_sweep(0.0), device_sweep(3e6)
    ref = make_reference(ref_sweep, "S11", (2.40e9, 2.50e9), "test")
    drift, delta_db, delta_deg = measure_drift(ref, now_sweep)
    frequency = rf.Frequency.from_f(FREQ, unit="Hz")
    a = rf.Network(frequency=frequency, s=ref_sweep.s, z0=50)
    b = rf.Network(frequency=frequency, s=now_sweep.s, z0=50)
    want_db = b.s_db[:, 0, 0] - a.s_db[:, 0, 0]
    want_deg = (b.s_deg[:, 0, 0] - a.s_deg[:, 0, 0] + 180.0) % 360.0 - 180.0
    np.testing.assert_allclose(delta_db, want_db, atol=1e-9)
    np.testing.assert_allclose(delta_deg, want_deg, atol=1e-9)
    assert drift.max_db == pytest.approx(np.abs(want_db).max(), abs=1e-9)
    assert drift.rms_deg == pytest.approx(np.sqrt(np.mean(want_deg**2)), abs=1e-9)
    band = (FREQ >= 2.40e9) & (FREQ <= 2.50e9)
    assert drift.worst_swr == pytest.approx(b.s_vswr[band, 0, 0].max(), rel=1e-12)
    assert drift.worst_swr_rise == pytest.approx(
        b.s_vswr[band, 0, 0].max() - a.s_vswr[band, 0, 0].max(), abs=1e-12)
    assert drift.resonance_shift_hz == pytest.approx(3e6, abs=1e3)


def test_reference_on_another_grid_is_resampled_and_must_cover_the_sweep() -> None:
    from acquire.errors import PlanError

    coarse = Sweep(FREQ[::4], DEVICE.s(FREQ[::4]), (50.0,))
    ref = make_reference(coarse, "S11", None, "file", freq_hz=FREQ)
    assert ref.values.shape == FREQ.shape
    drift, _, _ = measure_drift(ref, device_sweep(0.0))
    assert drift.max_db < 0.05  # linear interpolation between 600 kHz steps
    narrow = Sweep(FREQ[100:-100], DEVICE.s(FREQ[100:-100]), (50.0,))
    with pytest.raises(PlanError, match=r"soak reference file: covers .* the sweep needs"):
        make_reference(narrow, "S11", None, "file", freq_hz=FREQ)

