"""Resonance, bandwidth, Q and markers on synthetic resonators with known answers.

Worked example (Pozar, Microwave Engineering, 4th ed., ch. 6 series RLC; checked with
scikit-rf 2.2): R 40 Ω, L 1 µH, C 2.533030 pF, Z0 50 Ω, 90-110 MHz, 150 points.
"""

from __future__ import annotations

import numpy as np
import pytest

from acquire import metrics as m
from acquire.sweep import Sweep

R, L, C, Z0 = 40.0, 1e-6, 2.533030e-12, 50.0
F0 = 1.0 / (2 * np.pi * np.sqrt(L * C))  # 99.99999 MHz for these element values


def series_rlc(f, r=R, ind=L, cap=C, z0=Z0):
    w = 2 * np.pi * np.asarray(f)
    z = r + 1j * (w * ind - 1.0 / (w * cap))
    return (z - z0) / (z + z0)


def parallel_rlc(f, r, ind, cap, z0=Z0):
    w = 2 * np.pi * np.asarray(f)
    y = 1.0 / r + 1j * (w * cap - 1.0 / (w * ind))
    return (1.0 / y - z0) / (1.0 / y + z0)


def edges_analytic(rho):
    """Closed-form |Γ| = ρ edges of a series RLC (reference note, section 4)."""
    x = np.sqrt(((Z0 + R) ** 2 * rho**2 - (Z0 - R) ** 2) / (1 - rho**2))
    lo = (-x + np.sqrt(x * x + 4 * L / C)) / (2 * L) / (2 * np.pi)
    hi = (x + np.sqrt(x * x + 4 * L / C)) / (2 * L) / (2 * np.pi)
    return lo, hi


GRID = np.linspace(90e6, 110e6, 150)  # f0 falls half-way between two points


def test_worked_example_values_at_resonance():
    # At f0: |Γ| = 1/9, RL 19.0849 dB, SWR 1.25 (worked example).
    g = series_rlc(F0)
    assert abs(g) == pytest.approx(1 / 9, rel=1e-9)
    assert m.return_loss_db(g) == pytest.approx(19.0849, abs=5e-5)
    assert m.swr(g) == pytest.approx(1.25, rel=1e-9)


def test_resonance_parabolic_refinement_beats_nearest_point():
    g = series_rlc(GRID)
    res = m.resonance_min_gamma(GRID, g)
    nearest = GRID[np.argmin(np.abs(g))]
    assert nearest == pytest.approx(100.0671e6, abs=50)  # smallest bin (worked example)
    assert abs(nearest - F0) / F0 > 5e-4  # the nearest point alone misses by 0.067 %
    assert abs(res.freq_hz - F0) / F0 < 1e-4  # requirement: within 0.01 %
    assert abs(res.freq_hz - F0) < 100  # in fact tens of hertz (reference: ~23 Hz)
    assert not res.at_edge
    assert res.gamma_abs == pytest.approx(1 / 9, rel=1e-3)


def test_resonance_from_reactance_zero_crossing():
    g = series_rlc(GRID)
    res = m.resonance_reactance(GRID, g, Z0)
    assert res is not None and res.method == "reactance_zero"
    assert res.freq_hz - F0 == pytest.approx(22.5, abs=1.0)  # reference: 22.5 Hz error
    crossings = m.zero_crossings(GRID, m.impedance(g, Z0).imag)
    assert crossings.freq_hz.size == 1 and bool(crossings.rising[0])  # series: X rises


def test_resonance_at_sweep_edge_is_flagged_not_refined():
    f = np.linspace(101e6, 110e6, 50)
    res = m.resonance_min_gamma(f, series_rlc(f))
    assert res.at_edge and res.freq_hz == f[0]


@pytest.mark.parametrize(
    ("kwargs", "rho", "bw_ref"),
    [
        ({"return_loss_min_db": 10.0}, 10 ** (-10 / 20), 4.470211e6),
        ({"swr_max": 2.0}, 1 / 3, 4.774648e6),
    ],
)
def test_bandwidth_edges_match_closed_form(kwargs, rho, bw_ref):
    lo_ref, hi_ref = edges_analytic(rho)
    # Closed form reproduces the worked example: -10 dB edges 97.789870 / 102.260081 MHz,
    # SWR 2 edges 97.641168 / 102.415817 MHz.
    assert hi_ref - lo_ref == pytest.approx(bw_ref, abs=2)
    bw = m.bandwidth(GRID, series_rlc(GRID), **kwargs)
    assert bw.band is not None and not bw.edge_limited
    assert bw.band.lo_hz == pytest.approx(lo_ref, rel=1e-3)  # requirement: 0.1 %
    assert bw.band.hi_hz == pytest.approx(hi_ref, rel=1e-3)
    assert bw.band.lo_hz == pytest.approx(lo_ref, rel=1e-5)  # in fact far closer
    assert bw.band.hi_hz == pytest.approx(hi_ref, rel=1e-5)
    assert bw.width_hz == pytest.approx(bw_ref, rel=1e-3)
    assert bw.fractional == pytest.approx(bw_ref / F0, rel=1e-3)


def test_interpolated_bandwidth_matches_worked_sweep_numbers():
    # Worked example on the 150-point grid: -10 dB BW 4.471199 MHz, SWR-2 BW 4.775848 MHz.
    g = series_rlc(GRID)
    assert m.bandwidth(GRID, g, return_loss_min_db=10).width_hz == pytest.approx(4.471199e6, abs=2)
    assert m.bandwidth(GRID, g, swr_max=2.0).width_hz == pytest.approx(4.775848e6, abs=2)


def test_common_practice_swr2_band_is_wider_than_minus10db_band():
    # Common practice: "-10 dB bandwidth" and "SWR <= 2 bandwidth" are different limits
    # (SWR 2 is RL 9.54 dB); reference: 7 % wider here.
    g = series_rlc(GRID)
    ratio = m.bandwidth(GRID, g, swr_max=2).width_hz / m.bandwidth(
        GRID, g, return_loss_min_db=10).width_hz
    assert ratio == pytest.approx(1.068, abs=0.002)


def test_q_series_worked_example():
    # Q0 = ω0L/R = 15.7080, Q_L = ω0L/(R+Z0) = 6.98132, β = Z0/R = 1.25 (Pozar ch. 6).
    g = series_rlc(GRID)
    res = m.resonance_min_gamma(GRID, g)
    q = m.q_factor(GRID, g, res.freq_hz, Z0)
    assert q.model == "series"
    assert q.unloaded == pytest.approx(15.7080, rel=2e-5)
    assert q.loaded == pytest.approx(6.98132, rel=2e-5)
    assert q.coupling == pytest.approx(1.25, rel=1e-4)


def test_q_parallel_resonator():
    # Parallel RLC: Q0 = R/(ω0 L) = ω0 R C; coupling β = R/Z0 (Pozar ch. 6; recalled
    # from memory, consistent with the series case by duality).
    r, ind = 200.0, 50e-9
    cap = 1 / ((2 * np.pi * 433e6) ** 2 * ind)
    f = np.linspace(400e6, 466e6, 301)
    g = parallel_rlc(f, r, ind, cap)
    res = m.resonance_min_gamma(f, g)
    q = m.q_factor(f, g, res.freq_hz, Z0)
    q0 = r / (2 * np.pi * 433e6 * ind)
    assert q.model == "parallel"
    assert q.unloaded == pytest.approx(q0, rel=1e-3)
    assert q.coupling == pytest.approx(r / Z0, rel=1e-3)
    assert q.loaded == pytest.approx(q0 / (1 + r / Z0), rel=1e-3)
    crossings = m.zero_crossings(f, m.impedance(g, Z0).imag)
    assert crossings.freq_hz.size == 1 and not bool(crossings.rising[0])  # X falls
    assert crossings.freq_hz[0] == pytest.approx(433e6, rel=1e-5)


def test_every_contiguous_band_is_found():
    f = np.linspace(0.0, 10.0, 11)
    v = np.array([-20, -20, -5, -5, -15, -15, -15, -5, -12, -5, -20.0])
    bands = m.bands_below(f, v, -10.0)
    assert [(b.lo_open, b.hi_open) for b in bands] == [
        (True, False), (False, False), (False, False), (False, True)]
    # Linear interpolation between neighbours: -20 -> -5 crosses -10 at 1 + 2/3.
    assert bands[0].lo_hz == 0.0 and bands[0].hi_hz == pytest.approx(1 + 10 / 15)
    assert bands[1].lo_hz == pytest.approx(3.5) and bands[1].hi_hz == pytest.approx(6.5)
    assert bands[2].lo_hz == pytest.approx(7 + 5 / 7) and bands[2].hi_hz == pytest.approx(8 + 2 / 7)
    assert bands[3].hi_hz == 10.0 and bands[3].edge_limited


def test_bandwidth_reports_the_band_around_the_resonance():
    # Two dips; the deeper one (the resonance) decides which band is reported.
    f = np.linspace(80e6, 120e6, 801)
    g = 0.6 * series_rlc(f, r=30.0, ind=1e-6, cap=1 / ((2 * np.pi * 90e6) ** 2 * 1e-6)) \
        + 0.4 * series_rlc(f)
    bw = m.bandwidth(f, g, return_loss_min_db=10)
    assert len(bw.bands) >= 1
    assert bw.band is not None and bw.band.contains(bw.center_hz)
    bw_other = m.bandwidth(f, g, return_loss_min_db=10, around_hz=81e6)
    assert bw_other.band is None and bw_other.width_hz == 0.0


def test_no_band_when_the_match_never_reaches_the_threshold():
    bw = m.bandwidth(GRID, series_rlc(GRID, r=5.0), swr_max=2.0)
    assert bw.band is None and bw.bands == () and bw.width_hz == 0.0


def test_exact_zero_counts_as_one_crossing_and_a_touch_as_none():
    f = np.arange(6.0)
    c = m.zero_crossings(f, [-2, -1, 0, 1, 2, 3])
    assert list(c.freq_hz) == [2.0] and list(c.rising) == [True]
    assert m.zero_crossings(f, [2, 1, 0, 1, 2, 3]).freq_hz.size == 0


def test_marker_interpolates_between_points():
    g = series_rlc(GRID)
    mk = m.marker(GRID, g, F0, Z0)
    # Linear interpolation of Γ between points 134 kHz apart: Z within 0.1 Ω of 40 + j0.
    assert mk.impedance.real == pytest.approx(R, abs=0.1)
    assert abs(mk.impedance.imag) < 0.1
    assert mk.swr == pytest.approx(1.25, abs=0.005)
    assert "100 MHz" in mk.label() and "SWR 1.25" in mk.label()
    on_point = m.marker(GRID, g, GRID[10], Z0)
    assert on_point.value == pytest.approx(g[10], abs=1e-15)


def test_marker_outside_sweep_is_a_clear_error():
    with pytest.raises(m.MetricError, match="120 MHz lies outside the sweep 90 MHz to 110 MHz"):
        m.marker(GRID, series_rlc(GRID), 120e6)


def test_non_finite_data_is_refused():
    g = series_rlc(GRID)
    g[40] = np.nan
    with pytest.raises(m.MetricError, match="not finite at point 40"):
        m.resonance_min_gamma(GRID, g)
    with pytest.raises(m.MetricError, match="not finite"):
        m.bandwidth(GRID, g, swr_max=2.0, around_hz=F0)


def test_key_metrics_summary():
    sweep = Sweep(GRID, series_rlc(GRID))
    km = m.key_metrics(sweep)["S11"]
    assert km["resonance_hz"] == pytest.approx(F0, rel=1e-6)
    assert km["swr_min"] == pytest.approx(1.25, rel=1e-3)
    assert km["bandwidth_rl10db"]["width_hz"] == pytest.approx(4.471199e6, abs=2)
    assert km["bandwidth_swr2"]["width_hz"] == pytest.approx(4.775848e6, abs=2)
    assert km["q_unloaded"] == pytest.approx(15.708, rel=1e-4)


def test_q_matches_scikit_rf_qfactor_fit():
    # Oracle: skrf.qfactor.Qfactor(res_type='reflection') fit, reference Q_L 6.979 and
    # Q0 15.703 (its narrow-band model agrees within 0.04 %).
    import skrf as rf
    from skrf.qfactor import Qfactor

    freq = rf.Frequency.from_f(GRID, unit="Hz")
    net = rf.Network(frequency=freq, s=series_rlc(GRID).reshape(-1, 1, 1), z0=Z0)
    fit = Qfactor(net, res_type="reflection")
    fit.fit()
    ours = m.q_factor(GRID, series_rlc(GRID), m.resonance_min_gamma(GRID, series_rlc(GRID)).freq_hz)
    assert ours.loaded == pytest.approx(fit.Q_L, rel=1e-3)
    assert ours.unloaded == pytest.approx(fit.Q_unloaded(A=1.0), rel=1e-3)
