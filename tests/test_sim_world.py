"""The simulated world over time and across units: lot spread, golden unit, drift statistics
(NIST SP 1065 Allan deviation laws), and a full two-port calibration over the wire."""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import skrf as rf
from skrf.calibration import SOLT, TwelveTerm
from test_sim_support import RawClient, sweep_generic

from simulators.bench import Bench
from simulators.clock import SimClock
from simulators.errors import SimError
from simulators.lot import Lot
from simulators.server import SimServer

ROOT = Path(__file__).resolve().parents[1]


# -- lot -------------------------------------------------------------------------------

def test_units_are_deterministic_across_instances_and_processes():
    a, b = Bench().lot, Bench().lot
    assert a.unit("SN-0001") == b.unit("SN-0001")
    assert a.unit("SN-0001") != a.unit("SN-0002")
    code = ("import json; from simulators.lot import PRESET_LOTS; "
            "print(json.dumps(PRESET_LOTS['patch-2g45'].unit('SN-0001')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         cwd=ROOT, check=True, timeout=60).stdout
    import json

    assert json.loads(out) == a.unit("SN-0001")


def test_golden_unit_is_nominal_and_seed_changes_the_lot():
    lot = Lot("patch-2g45", "patch-2g45", spread={"f0_hz": 14e6})
    golden = lot.unit("GOLDEN")
    assert golden["f0_hz"] == 2.45e9 and golden["q"] == 14.0
    other = Lot("patch-2g45", "patch-2g45", spread={"f0_hz": 14e6}, seed=1)
    assert other.unit("SN-1") != lot.unit("SN-1")


def test_spread_has_the_requested_mean_and_sigma():
    lot = Lot("x", "resonator", nominal={"f0_hz": 1e9},
              spread={"f0_hz": {"mean": 1.01e9, "sigma": 5e6}, "q": 3.0})
    units = [lot.unit(f"U{i:05d}") for i in range(2000)]
    f0 = np.array([u["f0_hz"] for u in units])
    q = np.array([u["q"] for u in units])
    # standard error of the mean 5e6/√2000 ≈ 1.1e5; of sigma ≈ 5e6/√4000 ≈ 7.9e4
    assert abs(f0.mean() - 1.01e9) < 5e5 and abs(f0.std() - 5e6) < 4e5
    assert abs(q.mean() - 40.0) < 0.3 and abs(q.std() - 3.0) < 0.25


def test_patch_lot_gives_a_mix_of_passes_and_fails():
    # mask for the demo line: S11 ≤ −10 dB over the 2.400–2.4835 GHz ISM band
    bench = Bench()
    f = np.linspace(2.400e9, 2.4835e9, 85)
    fails = 0
    for i in range(200):
        bench.select_unit(f"PA{i:04d}")
        fails += np.any(20 * np.log10(np.abs(bench.truth(f)[:, 0, 0])) > -10)
    assert 0.1 < fails / 200 < 0.6
    bench.select_unit("GOLDEN")
    assert np.all(20 * np.log10(np.abs(bench.truth(f)[:, 0, 0])) < -10)


def test_bad_lot_spread_is_reported():
    with pytest.raises(SimError, match=r"spread.colour: not a numeric parameter"):
        Lot("x", "resonator", spread={"colour": 1.0})


# -- drift -----------------------------------------------------------------------------

def test_temperature_cycle_moves_the_resonance_sinusoidally():
    bench = Bench(clock=SimClock(rate=0.0))
    bench.set_drift(period_s=3600, amplitude_c=5.0, tempco_hz_per_c=-30e3)
    f = np.linspace(2.3e9, 2.6e9, 3001)
    for t in (0.0, 900.0, 1800.0, 2700.0, 3150.0):
        bench.clock.advance(t - bench.clock.now())
        bench.sweep(f)
        expect = -30e3 * 5.0 * math.sin(2 * math.pi * t / 3600)
        assert bench.last_sweep["shift_hz"] == pytest.approx(expect, abs=1e-6)
        assert bench.last_sweep["temperature_c"] == pytest.approx(23 + 5 * math.sin(
            2 * math.pi * t / 3600))
        # the device's resonance (parallel RLC: real impedance maximum) really moved
        g = bench.truth(f)[:, 0, 0]
        assert f[np.argmin(np.abs(g))] == pytest.approx(2.45e9 + expect, abs=2e5)


def _allan(y: np.ndarray, m: int) -> float:
    """Overlapping Allan deviation (Riley, NIST SP 1065, 2008)."""
    c = np.cumsum(np.concatenate([[0.0], y]))
    avg = (c[m:] - c[:-m]) / m
    d = avg[m:] - avg[:-m]
    return float(np.sqrt(0.5 * np.mean(d * d)))


def test_allan_helper_check_value():
    # Worked by hand from the overlapping Allan formula of NIST SP 1065 (not a value
    # printed there): y = [1, 2, 4, 7, 11], τ0 = 1 s → σ(1 s) = √(30/8)
    assert _allan(np.array([1.0, 2, 4, 7, 11]), 1) == pytest.approx(math.sqrt(30 / 8))
    assert _allan(np.array([1.0, 2, 4, 7, 11]), 2) == pytest.approx(math.sqrt(13))


def test_jitter_and_linear_drift_have_the_known_allan_deviations():
    bench = Bench(seed=11)
    bench.clock.set_rate(0.0)
    f = np.array([2.45e9])
    bench.set_drift(jitter_hz=2e3)
    shifts = []
    for _ in range(4000):
        bench.sweep(f)
        shifts.append(bench.last_sweep["shift_hz"])
    y = np.array(shifts)
    assert y.std() == pytest.approx(2e3, rel=0.05)
    # white noise: σ(m·τ0) ≈ σ/√m (NIST SP 1065)
    assert _allan(y, 1) == pytest.approx(2e3, rel=0.06)
    assert _allan(y, 16) == pytest.approx(2e3 / 4, rel=0.15)
    # linear drift D: σ(τ) = D·τ/√2 (NIST SP 1065), sampled every τ0 = 10 s
    bench.set_drift(rate_hz_per_s=5.0)
    y = []
    for _ in range(64):
        bench.clock.advance(10.0)
        bench.sweep(f)
        y.append(bench.last_sweep["shift_hz"])
    assert _allan(np.array(y), 4) == pytest.approx(5.0 * 40 / math.sqrt(2), rel=1e-9)


# -- two-port calibration over the wire -------------------------------------------------

def _net2(freq, traces):
    s = np.empty((freq.f.size, 2, 2), complex)
    s[:, 0, 0], s[:, 1, 0] = traces["S11"], traces["S21"]
    s[:, 0, 1], s[:, 1, 1] = traces["S12"], traces["S22"]
    return rf.Network(frequency=freq, s=s, z0=50)


def test_solt_through_the_wire_recovers_the_filter():
    # oracle: scikit-rf SOLT (Kruppa and Sodomsky 1971) with the kit's standard models
    start, stop, n = 2.2e9, 2.7e9, 201
    freq = rf.Frequency.from_f(np.linspace(start, stop, n), unit="Hz")
    names = ("S11", "S21", "S12", "S22")
    with SimServer() as sim, RawClient(sim.tcp_resource) as c:
        sim.bench.set_device("bandpass-2g45")
        measured, ideals = [], []
        for channel, std in ((1, "open"), (2, "short"), (3, "load"), (4, "thru")):
            c.write(f":ROUT:CLOS (@{channel})")
            measured.append(_net2(freq, sweep_generic(c, start, stop, n, names)))
            ideals.append(rf.Network(frequency=freq, s=sim.bench.standard(std, freq.f), z0=50))
        c.write(":ROUT:CLOS (@5)")
        raw = _net2(freq, sweep_generic(c, start, stop, n, names))
        truth = sim.bench.truth(freq.f)
        terms = sim.bench.error_terms(freq.f)
    cal = SOLT(measured=measured, ideals=ideals, n_thrus=1)
    cal.run()
    # SOLT here ignores isolation (−100 dB leakage), so allow 1e-4
    assert np.max(np.abs(cal.apply_cal(raw).s - truth)) < 1e-4
    keys = {"e00": "forward directivity", "e11": "forward source match",
            "e10e01": "forward reflection tracking", "e10e32": "forward transmission tracking",
            "e22": "forward load match", "e30": "forward isolation",
            "e33r": "reverse directivity", "e22r": "reverse source match",
            "e23e32r": "reverse reflection tracking",
            "e23e01r": "reverse transmission tracking", "e11r": "reverse load match",
            "e03r": "reverse isolation"}
    exact = TwelveTerm.from_coefs(freq, {keys[k]: v for k, v in terms.items()}, n_thrus=1)
    assert np.max(np.abs(exact.apply_cal(raw).s - truth)) < 1e-9
