"""Time-domain transform and distance axis, checked against sources outside the project.

- Synthetic line: the closed-form lossy-line cascade in tests/dtf_line.py (Pozar,
  Microwave Engineering, 4th ed., table 4.1 and eq. 2.35), written independently.
- Resolution and range: the published relations dR = v / (2 B) and
  R_max = v (N - 1) / (2 B) with the shared reference note's check values.
- Windows: highest sidelobes and -6 dB bandwidths from F. J. Harris, Proc. IEEE 66(1),
  1978, table 1, which prints whole decibels (-13 dB, -32 dB); the decimals checked here
  (-13.26 dB, -31.5 dB) are computed from the windows' closed-form spectra.
- scikit-rf (test dependency) as a second transform on the same data.
"""

from __future__ import annotations

import numpy as np
import pytest
from dtf_line import C0, line_s11, rho
from hypothesis import given, settings
from hypothesis import strategies as st

from acquire.timedomain.distance import LineSettings, distance_profile, round_trip_loss_db
from acquire.timedomain.peaks import find_peaks
from acquire.timedomain.transform import TransformError, TransformSettings, transform
from acquire.timedomain.windows import WindowError, check_window, window_info

VF = 0.66
F_HARMONIC = np.arange(1, 1001) * 1e6  # 1 MHz .. 1 GHz, step 1 MHz: harmonic grid
L1, L2 = 12.3, 20.0  # m
Z1, ZL = 60.0, 40.0
LOSS = 0.02  # dB/m, frequency independent in the model
LEVEL_TOL_DB = 0.3  # stated tolerance on peak levels


def _expected(loss_db_m: float) -> list[tuple[float, float]]:
    """(distance, level dB) of the two first-order reflections, round-trip loss included."""
    r1 = rho(50.0, Z1)
    r2 = rho(Z1, ZL) * (1 - r1**2)  # through the step and back
    return [
        (L1, 20 * np.log10(abs(r1)) - 2 * L1 * loss_db_m),
        (L1 + L2, 20 * np.log10(abs(r2)) - 2 * (L1 + L2) * loss_db_m),
    ]


@pytest.mark.parametrize("mode", ["bandpass", "lowpass"])
@pytest.mark.parametrize("window", ["none", "hann", "kaiser-6", "kaiser-13"])
def test_peaks_of_a_closed_form_line_sit_within_one_range_bin(mode: str, window: str) -> None:
    g = line_s11(F_HARMONIC, [(50.0, L1), (Z1, L2)], ZL, VF, LOSS)
    line = LineSettings(VF)  # no compensation: levels include the round-trip loss
    profile = distance_profile(F_HARMONIC, g, line, TransformSettings(mode, window, 8))
    peaks = find_peaks(profile, -30.0)
    assert len(peaks) == 2
    span = F_HARMONIC[-1] - F_HARMONIC[0]
    range_bin = C0 * VF / (2 * span)  # published range resolution
    for peak, (d, level) in zip(peaks, _expected(LOSS), strict=True):
        assert abs(peak.distance_m - d) < range_bin
        assert abs(peak.level_db - level) < LEVEL_TOL_DB
    if mode == "lowpass":  # sign: 50 -> 60 ohm is a step up, 60 -> 40 a step down
        assert [p.sign for p in peaks] == [1, -1]


@settings(max_examples=40, deadline=None)
@given(distance=st.floats(1.0, 55.0), level_db=st.floats(-45.0, -3.0),
       start_hz=st.floats(1e6, 2e9), window=st.sampled_from(["none", "hann", "kaiser-6"]))
def test_one_delayed_reflection_reads_its_distance_and_level(
        distance: float, level_db: float, start_hz: float, window: str) -> None:
    # Gamma(f) = rho exp(-j 2 pi f 2d / v): one reflection at d (DFT shift theorem), inside
    # the shown range (15/16 of v / (2 df) = 61.8 m here).
    f = start_hz + np.arange(601) * 1.5e6
    v = C0 * VF
    g = 10 ** (level_db / 20) * np.exp(-2j * np.pi * f * 2 * distance / v)
    profile = distance_profile(f, g, LineSettings(VF), TransformSettings("bandpass", window))
    (peak,) = find_peaks(profile, level_db - 20)
    assert abs(peak.distance_m - distance) < v / (2 * (f[-1] - f[0]))  # one range bin
    assert abs(peak.level_db - level_db) < 0.1  # zero padding 8 + parabola: scalloping


def test_bandpass_with_any_start_frequency() -> None:
    f = np.linspace(700e6, 2.7e9, 801)  # not harmonic
    g = line_s11(f, [(50.0, 3.0), (Z1, 4.0)], ZL, VF, 0.0)
    profile = distance_profile(f, g, LineSettings(VF), TransformSettings("bandpass", "hann"))
    peaks = find_peaks(profile, -30.0)
    range_bin = C0 * VF / (2 * (f[-1] - f[0]))
    assert [round(p.distance_m / range_bin) for p in peaks] == [
        round(3.0 / range_bin), round(7.0 / range_bin)]
    with pytest.raises(TransformError, match="harmonic grid"):
        transform(f, g, TransformSettings("lowpass"))


def test_loss_compensation_restores_the_mismatch_level() -> None:
    g = line_s11(F_HARMONIC, [(50.0, L1), (Z1, L2)], ZL, VF, 0.1)
    line = LineSettings(VF, loss_db_per_m=0.1, loss_source="plan", compensate=True)
    peaks = find_peaks(distance_profile(F_HARMONIC, g, line), -30.0)
    for peak, (_, level) in zip(peaks, _expected(0.0), strict=True):
        assert abs(peak.level_db - level) < LEVEL_TOL_DB
        assert abs(peak.measured_db - (level - 0.2 * peak.distance_m)) < LEVEL_TOL_DB
    assert round_trip_loss_db(np.array([10.0]), 0.1)[0] == pytest.approx(2.0)


def test_resolution_and_range_follow_the_published_relations() -> None:
    # Reference note check values: N = 1001, B = 1 GHz, VF = 0.66 -> 98.9 m and 9.9 cm.
    f = np.linspace(1e9, 2e9, 1001)
    profile = distance_profile(f, np.zeros(f.size, complex), LineSettings(VF))
    assert profile.alias_free_range_m == pytest.approx(98.9, abs=0.05)
    assert profile.resolution_m == pytest.approx(0.099, abs=0.0005)
    v = C0 * VF
    assert profile.alias_free_range_m == pytest.approx(v * 1000 / (2 * 1e9), rel=1e-12)
    assert profile.resolution_m == pytest.approx(v / (2 * 1e9), rel=1e-12)
    assert profile.shown_range_m < profile.alias_free_range_m


def test_lowpass_step_reads_the_impedance_of_each_section() -> None:
    g = line_s11(F_HARMONIC, [(50.0, L1), (Z1, L2)], ZL, VF, 0.0)
    profile = distance_profile(F_HARMONIC, g, LineSettings(VF),
                               TransformSettings("lowpass", "kaiser-6"))
    z = profile.impedance_ohm
    d = profile.distance_m
    assert np.median(z[(d > 2) & (d < L1 - 2)]) == pytest.approx(50.0, abs=0.5)
    assert np.median(z[(d > L1 + 2) & (d < L1 + L2 - 2)]) == pytest.approx(Z1, abs=0.5)
    # Beyond the load: the step holds the load's reflection seen through the 60-ohm
    # section (multiple reflections settle to the DC value ZL).
    assert np.median(z[(d > 60) & (d < 80)]) == pytest.approx(ZL, abs=0.5)
    assert profile.response.dc_estimated == pytest.approx(rho(50.0, ZL), abs=0.01)


@pytest.mark.parametrize(("name", "sidelobe_db", "tol"), [
    ("none", -13.26, 0.1),  # Harris 1978 table 1: -13 dB; decimals computed (sinc)
    ("hann", -31.5, 0.2),  # Harris 1978 table 1: -32 dB; decimals computed
    ("kaiser-6", -44.0, 1.5),  # reference note, value from memory
])
def test_window_sidelobes_match_published_levels(name: str, sidelobe_db: float,
                                                 tol: float) -> None:
    assert window_info(name).sidelobe_db == pytest.approx(sidelobe_db, abs=tol)
    # Harris 1978 -6 dB bandwidths (bins): rectangular 1.21, Hann 2.00 -> ratio 1.65.
    if name == "hann":
        assert window_info(name).mainlobe_6db_ratio == pytest.approx(2.00 / 1.21, abs=0.03)
    assert window_info("kaiser-13").sidelobe_db < -85.0


@pytest.mark.parametrize("n", [8, 13, 40])
def test_short_rectangular_window_matches_the_dirichlet_kernel(n: int) -> None:
    # |sum_k exp(j k x)| / n = |sin(n x / 2) / (n sin(x / 2))| (Oppenheim & Schafer); its
    # highest sidelobe lies beyond the first null x = 2 pi / n.
    x = np.linspace(2 * np.pi / n, np.pi, 200_001)
    dirichlet = np.abs(np.sin(n * x / 2) / (n * np.sin(x / 2)))
    expected = 20 * np.log10(dirichlet.max())
    assert window_info("none", n).sidelobe_db == pytest.approx(expected, abs=0.01)


def test_unknown_window_and_bad_grids_are_refused() -> None:
    with pytest.raises(WindowError, match="kaiser-<beta>"):
        check_window("kaiser-99")
    f = np.linspace(1e6, 1e9, 101)
    f[50] += 1e3
    with pytest.raises(TransformError, match="point 50"):
        transform(f, np.zeros(101, complex))
    g = np.zeros(101, complex)
    g[3] = np.nan
    with pytest.raises(TransformError, match="point 3"):
        transform(np.linspace(1e6, 1e9, 101), g)


def test_bandpass_equals_scikit_rf_impulse_response() -> None:
    import skrf as skrf
    f = np.linspace(100e6, 3e9, 401)
    g = line_s11(f, [(50.0, 2.0), (Z1, 5.0)], ZL, VF, LOSS)
    ours = transform(f, g, TransformSettings("bandpass", "none", 4))
    net = skrf.Network(frequency=skrf.Frequency.from_f(f, unit="hz"), s=g, z0=50)
    t, ir = net.impulse_response(window=None, n=ours.n_fft, bandpass=True)
    ir0, t0 = np.fft.ifftshift(ir), np.fft.ifftshift(t)  # index k <-> time k dt
    shown = ours.n_fft // 2  # their axis holds negative times beyond this
    np.testing.assert_allclose(t0[:shown], ours.time_s[:shown], rtol=1e-9, atol=1e-15)
    np.testing.assert_allclose(ir0[:shown] * ours.n_fft / f.size, ours.impulse[:shown],
                               atol=1e-12)


def test_lowpass_matches_scikit_rf_impulse_and_step() -> None:
    import skrf as skrf
    f = np.arange(0, 1001) * 2e6  # from DC: scikit-rf's low-pass needs the 0 Hz point
    g = line_s11(f, [(50.0, 6.0), (Z1, 8.0)], ZL, VF, 0.0)
    ours = transform(f, g, TransformSettings("lowpass", "none", 4))
    net = skrf.Network(frequency=skrf.Frequency.from_f(f, unit="hz"), s=g, z0=50)
    _, ir = net.impulse_response(window=None, n=ours.n_fft, bandpass=False)
    ir0 = np.fft.ifftshift(ir)
    shown = ours.n_fft // 2
    scale = ours.n_fft / (2 * f.size - 1)  # our impulse reads rho; theirs sums to DC
    np.testing.assert_allclose(ir0[:shown] * scale, ours.impulse[:shown], atol=1e-9)
    _, step = net.step_response(window=None, n=ours.n_fft)
    step0 = np.fft.ifftshift(step)  # their running sum starts at -T/2 (all quiet there)
    # Trapezoid (theirs) and running sum (ours) differ by half a sample of the impulse.
    d = C0 * VF * ours.time_s[:shown] / 2
    flat = (d > 1) & (d < 5) | (d > 7) & (d < 13)
    np.testing.assert_allclose(step0[:shown][flat], ours.step[:shown][flat], atol=2e-3)
