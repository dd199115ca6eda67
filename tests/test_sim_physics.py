"""Simulator physics against outside references: the calibration note's check values for the
standard models (offset-line model), the three-term and 12-term error models, Pozar's
formulas, and scikit-rf as an oracle (tests only)."""

from __future__ import annotations

import math

import numpy as np
import pytest
import skrf as rf
from skrf.calibration import OnePort, TwelveTerm
from skrf.media import DefinedGammaZ0

from simulators.bench import Bench, noise_sigma
from simulators.calkit import load_kit
from simulators.devices import make_device
from simulators.errorbox import measure, reference_plane_terms
from simulators.filters import butterworth_g, chebyshev_g

GHZ = 1e9


def _kit(tmp_path, body: str):
    path = tmp_path / "kit.yaml"
    path.write_text("kit: t\nz0: 50 ohm\nstandards:\n" + body)
    return load_kit(path)


# -- standard models: offset-line check values ------------------------------------------
# Source: Pozar, Microwave Engineering, 4th ed. (line equations), with the offset-standard
# check values computed in numpy and cross-checked with scikit-rf 2.2 (Z_r = Z_off = 50 Ω).

def test_offset_open_check_values(tmp_path):
    kit = _kit(tmp_path, "  open:\n    offset: {delay: 30 ps, z0: 50 ohm}\n"
                         "    capacitance: {c0: 50}\n")
    f = np.array([1 * GHZ, 10 * GHZ])
    ang = np.degrees(np.angle(kit.reflection("open", f)))
    assert ang == pytest.approx([-23.400, 126.146], abs=1e-3)


def test_offset_short_check_values(tmp_path):
    kit = _kit(tmp_path, "  short:\n    offset: {delay: 30 ps}\n    inductance: {l0: 5}\n")
    ang = np.degrees(np.angle(kit.reflection("short", np.array([1 * GHZ, 10 * GHZ]))))
    assert ang == pytest.approx([158.328, -36.720], abs=1e-3)


def test_flush_open_with_capacitance_check_value(tmp_path):
    # termination alone (no offset): ∠Γ_T = −1.800° at 1 GHz, −17.854° at 10 GHz
    kit = _kit(tmp_path, "  open:\n    capacitance: {c0: 50}\n")
    ang = np.degrees(np.angle(kit.reflection("open", np.array([1 * GHZ, 10 * GHZ]))))
    assert ang == pytest.approx([-1.800, -17.854], abs=1e-3)


def test_offset_loss_check_values(tmp_path):
    # L_off = 1 GΩ/s, τ = 30 ps: αl = 3.0e-4 Np at 1 GHz (factor e^{−2αl} = 0.99940),
    # 6.0e-4 Np at 4 GHz (0.99880)
    kit = _kit(tmp_path, "  short:\n    offset: {delay: 30 ps, loss_gohm_per_s: 1.0}\n")
    f = np.array([1 * GHZ, 4 * GHZ])
    alpha_l = kit.offsets["short"].line(f)[1].real
    assert alpha_l == pytest.approx([3.0e-4, 6.0e-4], rel=1e-9)
    assert np.exp(-2 * alpha_l) == pytest.approx([0.99940, 0.99880], abs=5e-6)
    # the whole lossy short (line impedance Z_c ≠ Z_r included) against the skrf cascade
    assert np.max(np.abs(kit.reflection("short", f) - _skrf_standard(kit, "short", f))) < 1e-12


def test_load_behind_mismatched_line_check_value(tmp_path):
    # 50 Ω load behind 20 ps of lossless 49 Ω line: max abs(Γ) = 0.02020
    kit = _kit(tmp_path, "  load:\n    offset: {delay: 20 ps, z0: 49 ohm}\n")
    g = kit.reflection("load", np.linspace(0.1 * GHZ, 20 * GHZ, 20001))
    assert np.abs(g).max() == pytest.approx(0.02020, abs=1e-5)


def _skrf_standard(kit, name, f):
    """Oracle: scikit-rf cascade of the offset line and the termination (calibration note §5)."""
    freq = rf.Frequency.from_f(f, unit="Hz")
    off = kit.offsets[name]
    zc, gl = off.line(f)
    ideal = DefinedGammaZ0(frequency=freq, z0=kit.z0)
    w = 2 * np.pi * f
    if name == "open":
        c = np.polyval(kit.open_c[::-1], f)
        term = ideal.load((1 - 50 * 1j * w * c) / (1 + 50 * 1j * w * c))
    else:
        ind = np.polyval(kit.short_l[::-1], f)
        zt = 1j * w * ind
        term = ideal.load((zt - 50) / (zt + 50))
    line = DefinedGammaZ0(frequency=freq, z0_port=kit.z0, z0=zc, gamma=gl).line(1, "m")
    return (line ** term).s[:, 0, 0]


@pytest.mark.parametrize("name", ["open", "short"])
def test_shipped_kit_standards_match_skrf_cascade(name):
    kit = load_kit("generic-sma-50")
    f = np.linspace(10e6, 18 * GHZ, 401)
    assert np.max(np.abs(kit.reflection(name, f) - _skrf_standard(kit, name, f))) < 1e-10


def test_ideal_kit_is_flush(tmp_path):
    kit = load_kit("ideal")
    f = np.array([1e6, 5 * GHZ])
    assert np.allclose(kit.reflection("open", f), 1)
    assert np.allclose(kit.reflection("short", f), -1)
    assert np.allclose(kit.reflection("load", f), 0)
    assert np.allclose(kit.thru(f)[:, 1, 0], 1)


def test_bad_kit_file_names_key(tmp_path):
    from simulators.errors import SimError

    with pytest.raises(SimError, match=r"standards.open.capacitance: unknown key 'cx'"):
        _kit(tmp_path, "  open:\n    capacitance: {cx: 1}\n")
    with pytest.raises(SimError, match="delay: unknown time unit"):
        _kit(tmp_path, "  short:\n    offset: {delay: 3 parsecs}\n")


# -- error model -------------------------------------------------------------------------

F = np.linspace(10e6, 6 * GHZ, 301)


def test_three_term_model_for_a_one_port():
    # Three-term model: M = e00 + e10e01·Γ/(1 − e11·Γ) (Marks, 50th ARFTG Digest, 1997)
    terms = reference_plane_terms(F)
    g = make_device("patch-2g45").s(F)[:, 0, 0]
    s = np.zeros((F.size, 2, 2), complex)
    s[:, 0, 0] = g
    m = measure(terms, s)[:, 0, 0]
    expect = terms["e00"] + terms["e10e01"] * g / (1 - terms["e11"] * g)
    assert np.max(np.abs(m - expect)) < 1e-14


def _skrf_coefs(terms):
    names = {"e00": "forward directivity", "e11": "forward source match",
             "e10e01": "forward reflection tracking", "e10e32": "forward transmission tracking",
             "e22": "forward load match", "e30": "forward isolation",
             "e33r": "reverse directivity", "e22r": "reverse source match",
             "e23e32r": "reverse reflection tracking",
             "e23e01r": "reverse transmission tracking", "e11r": "reverse load match",
             "e03r": "reverse isolation"}
    return {names[k]: v for k, v in terms.items()}


def test_twelve_term_measurement_matches_skrf_embed():
    # 12-term model (Kruppa and Sodomsky 1971); oracle: skrf TwelveTerm.from_coefs().embed
    freq = rf.Frequency.from_f(F, unit="Hz")
    terms = reference_plane_terms(F)
    dut = make_device("bandpass-2g45").s(F)
    cal = TwelveTerm.from_coefs(freq, _skrf_coefs(terms), n_thrus=1)
    embedded = cal.embed(rf.Network(frequency=freq, s=dut, z0=50)).s
    assert np.max(np.abs(measure(terms, dut) - embedded)) < 1e-12


def test_error_terms_have_plausible_magnitudes():
    db = {k: 20 * np.log10(np.abs(v)) for k, v in reference_plane_terms(F).items()}
    assert db["e00"].min() > -45 and db["e00"].max() < -25          # directivity ≈ −30 dB
    assert db["e11"].min() > -32 and db["e11"].max() < -15          # source match ≈ −20 dB
    assert db["e11"].max() - db["e11"].min() > 3                    # ... with ripple
    assert db["e10e01"].min() > -6 and db["e10e01"].max() < 0
    assert db["e30"].max() < -90


def test_tracking_phase_shows_the_test_cable_delay():
    # A reflection through a one-way delay τ has group delay 2τ (Pozar ch. 2): the port-1
    # cable (5 ns) plus the internal path (0.8 ns round trip) gives about 10.8 ns.
    t = reference_plane_terms(F)["e10e01"]
    slope = np.polyfit(2 * np.pi * F, np.unwrap(np.angle(t)), 1)[0]
    assert -slope == pytest.approx(10.8e-9, rel=0.02)


def _net(freq, g):
    return rf.Network(frequency=freq, s=np.asarray(g).reshape(-1, 1, 1), z0=50)


def test_one_port_cal_with_kit_models_recovers_truth():
    # Oracle: scikit-rf OnePort with ideals from its own cascade of the kit's offset model
    bench = Bench()
    freq = rf.Frequency.from_f(F, unit="Hz")
    measured, ideals = [], []
    for name in ("short", "open", "load"):
        bench.connect(name)
        measured.append(_net(freq, bench.sweep(F)[:, 0, 0]))
        if name == "load":
            ideals.append(_net(freq, bench.kit.reflection("load", F)))
        else:
            ideals.append(_net(freq, _skrf_standard(bench.kit, name, F)))
    cal = OnePort(measured=measured, ideals=ideals)
    cal.run()
    bench.connect("device")
    corrected = cal.apply_cal(_net(freq, bench.sweep(F)[:, 0, 0])).s[:, 0, 0]
    assert np.max(np.abs(corrected - bench.truth(F)[:, 0, 0])) < 1e-9
    assert np.max(np.abs(cal.coefs["directivity"] - bench.error_terms(F)["e00"])) < 1e-9


def test_disturbed_fixture_defeats_an_old_cal_and_a_new_cal_absorbs_it():
    bench = Bench()
    kit = bench.kit

    def cal_terms():
        m = {}
        for name in ("open", "short", "load"):
            bench.connect(name)
            m[name] = bench.sweep(F)[:, 0, 0]
        g = {n: kit.reflection(n, F) for n in m}
        a = np.stack([np.stack([np.ones(F.size), g[n] * m[n], -g[n]], -1) for n in m], 1)
        e00, e11, de = np.linalg.solve(a, np.stack(list(m.values()), 1)[..., None])[..., 0].T
        return e00, e11, e00 * e11 - de

    def corrected(terms):
        e00, e11, e10e01 = terms
        bench.connect("device")
        m = bench.sweep(F)[:, 0, 0]
        return (m - e00) / (e10e01 + e11 * (m - e00))  # correction, calibration note §3

    truth = bench.truth(F)[:, 0, 0]
    before = cal_terms()
    assert np.max(np.abs(corrected(before) - truth)) < 1e-9
    bench.disturb(delay_s=25e-12, z_ohm=58.0)
    assert np.max(np.abs(corrected(before) - truth)) > 0.05
    assert np.max(np.abs(corrected(cal_terms()) - truth)) < 1e-9


# -- devices -----------------------------------------------------------------------------

def test_series_resonator_worked_example():
    # Pozar ch. 6 series RLC; worked example R = 40 Ω, L = 1 µH, C = 2.533030 pF, Z0 = 50 Ω:
    # abs(Γ(f0)) = 1/9 and −10 dB edges at 97.789870 / 102.260081 MHz.
    r, ind, cap = 40.0, 1e-6, 2.533030e-12
    f0 = 1 / (2 * math.pi * math.sqrt(ind * cap))
    dev = make_device("resonator", f0_hz=f0, q=2 * math.pi * f0 * ind / r, r_ohm=r,
                      topology="series")
    g = np.abs(dev.s(np.array([f0, 97.789870e6, 102.260081e6]))[:, 0, 0])
    assert g[0] == pytest.approx(1 / 9, abs=1e-9)
    assert g[1:] == pytest.approx([10 ** -0.5] * 2, abs=2e-6)
    # oracle: scikit-rf series R-L-C to ground
    freq = rf.Frequency(90, 110, 41, unit="MHz")
    med = DefinedGammaZ0(frequency=freq, z0=50)
    net = med.resistor(r) ** med.inductor(ind) ** med.capacitor(cap) ** med.short()
    assert np.max(np.abs(dev.s(freq.f)[:, 0, 0] - net.s[:, 0, 0])) < 1e-9


def test_resonator_behind_line_matches_skrf():
    dev = make_device("patch-2g45")
    freq = rf.Frequency(2.2, 2.7, 101, unit="GHz")
    med = DefinedGammaZ0(frequency=freq, z0=50)
    w0 = 2 * math.pi * dev.f0_hz
    ind = dev.r_ohm / (w0 * dev.q)  # parallel RLC: Q0 = R/(ω0L) (Pozar ch. 6)
    cap = 1 / (w0 * w0 * ind)
    tank = med.shunt_inductor(ind) ** med.shunt_capacitor(cap) ** med.load(
        (dev.r_ohm - 50) / (dev.r_ohm + 50))
    theta = 2 * math.pi * freq.f * dev.line_delay_s
    line = DefinedGammaZ0(frequency=freq, z0=50, gamma=1j * theta).line(1, "m")
    net = line ** tank
    assert np.max(np.abs(dev.s(freq.f)[:, 0, 0] - net.s[:, 0, 0])) < 1e-9


def test_cable_matches_skrf_line():
    dev = make_device("cable-1m")
    freq = rf.Frequency(0.01, 6, 201, unit="GHz")
    alpha = dev.loss_db_at_1ghz * math.log(10) / 20 * np.sqrt(freq.f / 1e9)
    gamma = alpha + 1j * 2 * math.pi * freq.f * dev.delay_s
    net = DefinedGammaZ0(frequency=freq, z0_port=50, z0=dev.z_ohm, gamma=gamma).line(1, "m")
    assert np.max(np.abs(dev.s(freq.f) - net.s)) < 1e-12


def test_prototype_values():
    # Pozar ch. 8 tables (recalled from memory): Butterworth N=3: 1, 2, 1;
    # 0.5 dB equal-ripple N=3: 1.5963, 1.0967, 1.5963
    assert butterworth_g(3) == pytest.approx([1.0, 2.0, 1.0])
    assert chebyshev_g(3, 0.5) == pytest.approx([1.5963, 1.0967, 1.5963], abs=2e-4)


@pytest.mark.parametrize("order,ripple", [(3, 0.0), (4, 0.0), (5, 0.0), (3, 0.5), (5, 0.1)])
def test_bandpass_follows_the_prototype_response(order, ripple):
    # Lossless response (Pozar ch. 8): |S21|² = 1/(1 + ε²·T(x)²), x = (f/f0 − f0/f)/Δ,
    # T(x) = x^N (maximally flat, ε = 1) or the Chebyshev polynomial T_N (equal ripple).
    f0, bw = 2.45e9, 100e6
    f = np.linspace(2.2e9, 2.7e9, 501)
    s = make_device("filter", center_hz=f0, bandwidth_hz=bw, order=order, ripple_db=ripple,
                    q=0).s(f)
    x = (f / f0 - f0 / f) / (bw / f0)
    if ripple == 0:
        expect = 1 / (1 + x ** (2 * order))
    else:
        eps2 = 10 ** (ripple / 10) - 1
        expect = 1 / (1 + eps2 * np.polynomial.chebyshev.chebval(x, [0] * order + [1]) ** 2)
    assert np.max(np.abs(np.abs(s[:, 1, 0]) ** 2 - expect)) < 1e-9
    assert np.allclose(np.abs(s[:, 0, 0]) ** 2 + np.abs(s[:, 1, 0]) ** 2, 1)  # lossless


def test_lossy_filter_has_insertion_loss():
    s = make_device("bandpass-2g45").s(np.array([2.45e9]))
    il = -20 * np.log10(abs(s[0, 1, 0]))
    assert 0.1 < il < 3


# -- noise and timing -------------------------------------------------------------------

def test_noise_follows_the_square_root_laws():
    # receiver noise: sigma ∝ 10^(−P/20)·√IFBW/√N (common practice; the √ laws)
    bench = Bench(noise=True, seed=3)
    f = np.linspace(1e9, 2e9, 20001)
    clean = Bench().sweep(f)

    def spread(**kw):
        return np.std((bench.sweep(f, **kw) - clean)[:, 0, 0].real)

    base = spread(power_dbm=0.0, if_bandwidth_hz=1e3)
    assert base == pytest.approx(noise_sigma(0.0, 1e3, 1), rel=0.03)
    assert spread(power_dbm=-20.0, if_bandwidth_hz=1e3) / base == pytest.approx(10, rel=0.05)
    assert spread(power_dbm=0.0, if_bandwidth_hz=1e5) / base == pytest.approx(10, rel=0.05)
    assert spread(power_dbm=0.0, if_bandwidth_hz=1e3, averaging=100) / base == pytest.approx(
        0.1, rel=0.05)


def test_sweep_is_fast_at_100001_points():
    bench = Bench(noise=True)
    raw = bench.sweep(np.linspace(10e6, 6e9, 100001))
    assert raw.shape == (100001, 2, 2) and np.all(np.isfinite(raw))
