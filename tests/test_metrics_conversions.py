"""Point-by-point conversions against the handbook, a worked example and scikit-rf.

Sources named beside each check: D. M. Pozar, Microwave Engineering, 4th ed., ch. 2
(definitions of Γ, SWR, return loss, mismatch loss, impedance) and ch. 6 (series and
parallel equivalents); scikit-rf 2.2 as an independent oracle (tests only).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from acquire import metrics as m

# Check table: SWR -> |Γ|, return loss (dB), mismatch loss (dB), reflected power.
# Values computed from the Pozar ch. 2 formulas and printed to the digits shown.
CHECK_TABLE = [
    (1.1, 0.047619, 26.4444, 0.00986, 0.00227),
    (1.2, 0.090909, 20.8279, 0.03604, 0.00826),
    (1.5, 0.200000, 13.9794, 0.17729, 0.04000),
    (2.0, 0.333333, 9.5424, 0.51153, 0.11111),
    (3.0, 0.500000, 6.0206, 1.24939, 0.25000),
    (5.0, 0.666667, 3.5218, 2.55273, 0.44444),
    (10.0, 0.818182, 1.7430, 4.80725, 0.66942),
]


@pytest.mark.parametrize(("swr", "gamma", "rl", "ml", "power"), CHECK_TABLE)
def test_check_table_pozar_ch2(swr, gamma, rl, ml, power):
    g = m.gamma_from_swr(swr)
    assert g == pytest.approx(gamma, abs=5e-7)
    assert m.return_loss_db(g) == pytest.approx(rl, abs=5e-5)
    assert m.return_loss_db(g, negative=True) == pytest.approx(-rl, abs=5e-5)  # S11 dB column
    assert m.db20(g) == pytest.approx(-rl, abs=5e-5)
    assert m.mismatch_loss_db(g) == pytest.approx(ml, abs=5e-6)
    assert m.reflected_power_fraction(g) == pytest.approx(power, abs=5e-6)
    assert m.swr(g) == pytest.approx(swr, rel=1e-12)  # and back
    assert m.return_loss_from_swr(swr) == pytest.approx(rl, abs=5e-5)
    assert m.swr_from_return_loss(rl) == pytest.approx(swr, rel=1e-4)


def test_check_table_perfect_match_pozar_ch2():
    # SWR 1.0: |Γ| = 0, RL infinite (clamped to the documented floor), ML 0.
    g = m.gamma_from_swr(1.0)
    assert g == 0.0
    assert m.return_loss_db(g) == -m.DB_FLOOR
    assert m.mismatch_loss_db(g) == 0.0
    assert m.swr(0.0) == 1.0


def test_check_table_matches_scikit_rf_vectorised():
    # Oracle: skrf.tlineFunctions (reference note: differences ~1e-15).
    import skrf.tlineFunctions as tf
    swr = np.array([row[0] for row in CHECK_TABLE])
    gamma = tf.zl_2_Gamma0(50.0, 50.0 * swr)
    assert np.allclose(m.reflection(50.0 * swr, 50.0), gamma, rtol=0, atol=1e-15)
    assert np.allclose(m.swr(gamma), tf.Gamma0_2_swr(gamma), rtol=1e-13)


@pytest.mark.parametrize(
    ("rl_db", "swr"), [(10.0, 1.9250), (14.0, 1.4985), (20.0, 1.2222)]
)
def test_inverse_values_pozar_ch2(rl_db, swr):
    assert m.swr_from_return_loss(rl_db) == pytest.approx(swr, abs=5e-5)


def test_common_practice_thresholds():
    # Common practice (not a standard): SWR <= 2 is acceptable in most applications,
    # SWR <= 1.5 is a good match (~14 dB), SWR 5 is about 3.5 dB return loss, 44 %
    # reflected: a clear fault. The -10 dB band is a different, slightly tighter limit.
    assert m.return_loss_from_swr(2.0) == pytest.approx(9.54, abs=0.005)
    assert m.return_loss_from_swr(2.0) < 10.0
    assert m.return_loss_from_swr(1.5) == pytest.approx(14.0, abs=0.03)
    assert m.return_loss_from_swr(5.0) == pytest.approx(3.5, abs=0.03)
    assert m.reflected_power_fraction(m.gamma_from_swr(5.0)) == pytest.approx(0.44, abs=0.005)
    assert m.swr_from_return_loss(10.0) < 2.0


def test_worked_impedance_example():
    # Worked example: Γ = 0.2 + 0.1j, Z0 = 50 Ω, f = 1 GHz (values from the Pozar ch. 2
    # and ch. 6 formulas; Z is exactly 950/13 + j·200/13).
    g = 0.2 + 0.1j
    z = complex(m.impedance(g, 50.0))
    assert z == pytest.approx(950 / 13 + 200j / 13, rel=1e-14)
    mag, ang = m.polar(z)
    assert mag == pytest.approx(74.6788, abs=5e-5)
    assert ang == pytest.approx(11.8887, abs=5e-5)
    y = complex(m.admittance(g, 50.0))
    assert y.real == pytest.approx(13.1034e-3, abs=5e-8)
    assert y.imag == pytest.approx(-2.7586e-3, abs=5e-8)
    par = m.parallel_equivalent(1e9, y)
    assert par.resistance_ohm == pytest.approx(76.3158, abs=5e-5)
    assert par.reactance_ohm == pytest.approx(362.500, abs=5e-4)
    assert par.inductance_h == pytest.approx(57.694e-9, abs=5e-13)
    assert np.isnan(par.capacitance_f)
    assert abs(g) == pytest.approx(0.223607, abs=5e-7)
    assert m.phase_deg(g) == pytest.approx(26.5651, abs=5e-5)
    assert m.swr(g) == pytest.approx(1.57601, abs=5e-6)
    assert m.return_loss_db(g) == pytest.approx(13.0103, abs=5e-5)
    assert m.mismatch_loss_db(g) == pytest.approx(0.22276, abs=5e-6)
    ser = m.series_equivalent(1e9, z)
    assert ser.resistance_ohm == pytest.approx(73.08, abs=5e-3)
    assert ser.inductance_h == pytest.approx(2.44854e-9, abs=5e-15)
    assert np.isnan(ser.capacitance_f)
    assert ser.q == pytest.approx(0.2105, abs=5e-5)
    conj = m.series_equivalent(1e9, m.impedance(np.conj(g), 50.0))
    assert conj.capacitance_f == pytest.approx(10.3451e-12, abs=5e-17)
    assert np.isnan(conj.inductance_h)


@pytest.mark.parametrize(
    ("z", "gamma"), [(25.0, -1 / 3), (100.0, 1 / 3), (50 + 50j, 0.2 + 0.4j)]
)
def test_quick_points_pozar_ch2(z, gamma):
    assert complex(m.reflection(z, 50.0)) == pytest.approx(gamma, abs=1e-15)
    assert complex(m.impedance(gamma, 50.0)) == pytest.approx(z, rel=1e-13)


def test_impedance_admittance_swr_against_scikit_rf_random():
    # Oracle: Network.z, Network.y, Network.s_vswr of scikit-rf on random passive data.
    import skrf as rf
    rng = np.random.default_rng(7)
    n = 257
    g = 0.95 * np.sqrt(rng.uniform(0, 1, n)) * np.exp(2j * np.pi * rng.uniform(0, 1, n))
    for z0 in (50.0, 75.0):
        net = rf.Network(frequency=rf.Frequency(1, 3, n, "GHz"), s=g.reshape(-1, 1, 1), z0=z0)
        assert np.allclose(m.impedance(g, z0), net.z[:, 0, 0], rtol=1e-12, atol=1e-12)
        assert np.allclose(m.admittance(g, z0), net.y[:, 0, 0], rtol=1e-12, atol=1e-15)
        assert np.allclose(m.swr(g), net.s_vswr[:, 0, 0], rtol=1e-12)
        assert np.allclose(m.db20(g), net.s_db[:, 0, 0], rtol=0, atol=1e-12)
        assert np.allclose(m.phase_deg(g, unwrap=True), net.s_deg_unwrap[:, 0, 0], atol=1e-9)


def test_group_delay_against_scikit_rf_random():
    # Oracle: Network.group_delay (−d(unwrapped phase)/dω with numpy.gradient).
    import skrf as rf
    rng = np.random.default_rng(11)
    n = 301
    freq = rf.Frequency(0.5, 4.0, n, "GHz")
    phase = np.cumsum(rng.normal(-0.2, 0.1, n))
    s = rng.uniform(0.1, 0.9, n) * np.exp(1j * phase)
    net = rf.Network(frequency=freq, s=s.reshape(-1, 1, 1), z0=50)
    ours = m.group_delay_s(freq.f, s)
    assert np.allclose(ours, net.group_delay[:, 0, 0].real, rtol=1e-12, atol=1e-21)


def test_group_delay_of_a_delay_line_reflection():
    # A reflection through a one-way delay τ has τ_g = 2τ (reference: Γ = −e^{−j2ωτ},
    # τ = 100 ps over 1-3 GHz gives 200 ps everywhere, phase slope −0.0720°/MHz).
    f = np.linspace(1e9, 3e9, 401)
    tau = 100e-12
    g = -np.exp(-2j * 2 * np.pi * f * tau)
    for aperture in (1, 5, 21):
        assert np.allclose(m.group_delay_s(f, g, aperture), 2 * tau, rtol=1e-9)
    slope = np.diff(m.phase_deg(g, unwrap=True)) / np.diff(f / 1e6)
    assert np.allclose(slope, -0.0720, atol=5e-5)


def test_group_delay_aperture_reduces_noise():
    # Smoothing over an aperture: a slope fitted over k points (common practice).
    rng = np.random.default_rng(3)
    f = np.linspace(1e9, 2e9, 1001)
    g = np.exp(-2j * np.pi * f * 1e-9 + 1j * rng.normal(0, 0.01, f.size))
    raw = m.group_delay_s(f, g)
    smooth = m.group_delay_s(f, g, aperture=21)
    assert np.std(smooth - 1e-9) < np.std(raw - 1e-9) / 10
    assert np.mean(smooth) == pytest.approx(1e-9, rel=1e-3)


@pytest.mark.parametrize("aperture", [0, 2, 4])
def test_group_delay_rejects_even_aperture(aperture):
    with pytest.raises(m.MetricError, match="odd"):
        m.group_delay_s([1.0, 2.0, 3.0], [1, 1j, -1], aperture)


def test_group_delay_rejects_aperture_wider_than_sweep():
    with pytest.raises(m.MetricError, match="exceeds the 3 sweep points"):
        m.group_delay_s([1.0, 2.0, 3.0], [1, 1j, -1], 5)


def test_no_silent_clipping_for_active_or_lossless_reflections():
    # Reference note: |Γ| >= 1 gives SWR = ∞; flag, never clip.
    g = np.array([0.5, 1.0, 1.2 + 0j])
    s = m.swr(g)
    assert s[0] == pytest.approx(3.0) and np.isinf(s[1]) and np.isinf(s[2])
    assert list(m.passive_violations(g)) == [False, True, True]
    ml = m.mismatch_loss_db(g)
    assert np.isinf(ml[1]) and np.isnan(ml[2])
    assert m.return_loss_db(1.2) < 0  # negative return loss stays visible


def test_open_and_short_limits():
    assert np.isinf(m.impedance(1.0 + 0j, 50.0).real)
    assert np.isinf(m.admittance(-1.0 + 0j, 50.0).real)
    assert complex(m.reflection(np.inf, 50.0)) == 1.0
    assert complex(m.impedance(-1.0 + 0j, 50.0)) == 0.0


def test_insertion_loss_is_positive_for_loss():
    assert m.insertion_loss_db(0.5) == pytest.approx(6.0206, abs=5e-5)  # 20·log10(2)


def test_gamma_from_swr_rejects_below_one():
    with pytest.raises(m.MetricError, match=r"at least 1, got 0\.5"):
        m.gamma_from_swr(0.5)


@settings(max_examples=200, deadline=None)
@given(
    st.floats(0.0, 0.999),
    st.floats(-np.pi, np.pi),
    st.sampled_from([50.0, 75.0, 25.0]),
)
def test_round_trip_gamma_impedance(mag, angle, z0):
    g = mag * np.exp(1j * angle)
    back = complex(m.reflection(m.impedance(g, z0), z0))
    assert back == pytest.approx(g, abs=1e-9)
    assert float(m.gamma_from_swr(m.swr(g))) == pytest.approx(mag, abs=1e-9)
