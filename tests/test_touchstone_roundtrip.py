"""Round trips through our writer and reader, and scikit-rf as an outside oracle.

scikit-rf (tests only) reads what we write and writes what we read; agreement within
1e-12 in RI shows both sides follow the same reading of the Touchstone File Format
Specification 2.0. Property tests (hypothesis) cover port counts 1..5, formats,
frequency units, versions and precision settings.
"""

from __future__ import annotations

import numpy as np
import pytest
import skrf as rf
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from acquire.sweep import Sweep
from acquire.touchstone import (
    TouchstoneOptions,
    format_touchstone,
    parse_touchstone,
    read_touchstone,
    write_touchstone,
)


def random_sweep(points: int, ports: int, seed: int, z0=None, scale: float = 0.5) -> Sweep:
    rng = np.random.default_rng(seed)
    freq = np.linspace(10e6, 6e9, points)
    s = scale * (rng.normal(size=(points, ports, ports))
                 + 1j * rng.normal(size=(points, ports, ports)))
    return Sweep(freq, s, z0 or (50.0,) * ports, {"plan": "patch-2g45", "serial": "A0042"})


def skrf_network(path) -> object:
    return rf.Network(str(path))


# -- scikit-rf reads our files ----------------------------------------------------------

@pytest.mark.parametrize("ports", [1, 2, 3, 4, 5])
@pytest.mark.parametrize("version", ["1.1", "2.0"])
@pytest.mark.parametrize("unit", ["Hz", "GHz"])
def test_skrf_reads_our_ri_files_within_1e_12(tmp_path, ports, version, unit):
    sweep = random_sweep(51, ports, seed=ports)
    path = write_touchstone(tmp_path / f"dut.s{ports}p", sweep,
                            TouchstoneOptions(version=version, freq_unit=unit))
    net = skrf_network(path)
    assert np.max(np.abs(net.s - sweep.s)) < 1e-12
    assert np.max(np.abs(net.f - sweep.freq_hz) / sweep.freq_hz) < 1e-12
    np.testing.assert_allclose(net.z0, 50.0)


@pytest.mark.parametrize("fmt", ["MA", "DB"])
@pytest.mark.parametrize("version", ["1.1", "2.0"])
def test_skrf_reads_our_ma_db_files(tmp_path, fmt, version):
    sweep = random_sweep(31, 2, seed=7)
    options = TouchstoneOptions(version=version, fmt=fmt)
    path = write_touchstone(tmp_path / "dut.s2p", sweep, options)
    assert np.max(np.abs(skrf_network(path).s - sweep.s)) < 1e-12


@pytest.mark.parametrize("version", ["1.1", "2.0"])
def test_skrf_reads_per_port_references(tmp_path, version):
    # 1.1: "R 50 75 25" on the option line; 2.0: [Reference]
    sweep = random_sweep(11, 3, seed=3, z0=(50.0, 75.0, 25.0))
    path = write_touchstone(tmp_path / "dut.s3p", sweep, TouchstoneOptions(version=version))
    net = skrf_network(path)
    np.testing.assert_allclose(net.z0[0], [50.0, 75.0, 25.0])
    assert np.max(np.abs(net.s - sweep.s)) < 1e-12


@pytest.mark.parametrize(("parameter", "version"), [("Z", "1.1"), ("Z", "2.0"), ("Y", "2.0")])
def test_skrf_reads_our_z_y_files_as_the_same_network(tmp_path, parameter, version):
    # 1.x Z/Y normalised, 2.x absolute (TS2.0 option line). scikit-rf 2.2 multiplies any
    # version 1 Y/Z/H/G by R, right for Z only, so version 1 Y is checked in
    # test_touchstone_writer against the definition y = Y*R instead.
    sweep = random_sweep(21, 2, seed=11, scale=0.2)
    path = write_touchstone(tmp_path / f"dut.{parameter.lower()}2p", sweep,
                            TouchstoneOptions(version=version, parameter=parameter))
    assert np.max(np.abs(skrf_network(path).s - sweep.s)) < 1e-12


# -- we read scikit-rf's files ------------------------------------------------------------

@pytest.mark.parametrize("ports", [1, 2, 3, 4])
@pytest.mark.parametrize("form", ["ri", "ma", "db"])
def test_we_read_skrf_files_within_1e_12(tmp_path, ports, form):
    sweep = random_sweep(41, ports, seed=20 + ports)
    net = rf.Network(frequency=rf.Frequency.from_f(sweep.freq_hz, unit="hz"), s=sweep.s, z0=50)
    net.write_touchstone(str(tmp_path / "sk"), form=form)
    got = read_touchstone(tmp_path / f"sk.s{ports}p")
    assert got.warnings == ()
    assert np.max(np.abs(got.data - sweep.s)) < 1e-12
    np.testing.assert_array_equal(got.freq_hz, sweep.freq_hz)     # repr digits: exact


def test_we_read_skrf_ri_files_bit_exact(tmp_path):
    # scikit-rf prints repr() (shortest round-trip) digits, so RI is exact
    sweep = random_sweep(101, 2, seed=5)
    net = rf.Network(frequency=rf.Frequency.from_f(sweep.freq_hz, unit="hz"), s=sweep.s, z0=50)
    net.write_touchstone(str(tmp_path / "sk"), form="ri")
    np.testing.assert_array_equal(read_touchstone(tmp_path / "sk.s2p").data, sweep.s)


# -- our own round trips (hypothesis) -------------------------------------------------------

_finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False,
                    allow_subnormal=False)
_tiny = st.floats(min_value=-1e-30, max_value=1e-30, allow_nan=False, allow_subnormal=False)


@st.composite
def sweeps(draw, max_ports: int = 5):
    ports = draw(st.integers(1, max_ports))
    points = draw(st.integers(1, 12))
    freq = sorted(draw(st.sets(st.floats(0, 1e11, allow_nan=False, allow_subnormal=False),
                               min_size=points, max_size=points)))
    values = draw(st.lists(st.one_of(_finite, _tiny, st.sampled_from([0.0, -0.0, 1.0, -1.0])),
                           min_size=2 * points * ports * ports,
                           max_size=2 * points * ports * ports))
    s = np.array(values).view(np.complex128).reshape(points, ports, ports)
    z0 = draw(st.sampled_from([50.0, 75.0, 12.5]))
    return Sweep(np.array(freq), s, (z0,) * ports, {"k": points})


_options = st.builds(
    TouchstoneOptions,
    version=st.sampled_from(["1.1", "2.0"]),
    fmt=st.sampled_from(["RI", "MA", "DB"]),
    freq_unit=st.sampled_from(["Hz", "kHz", "MHz", "GHz"]),
    precision=st.sampled_from([None, 13, 15, 16, 17, "full"]),
)
_fast = settings(max_examples=60, deadline=None,
                 suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


def expected_error(s: np.ndarray, options: TouchstoneOptions) -> np.ndarray:
    """Largest |error| allowed per value after writing with ``options.digits`` digits.

    Each printed number is within half a unit of its last digit (plus a few ulps of the
    vectorised arithmetic). A dB error d changes |x| by the factor 10**(d/20), i.e. by
    d*ln(10)/20 relative; an angle error in degrees moves x by |x|*d*pi/180.
    """
    half = 0.5 * 10.0 ** (1 - options.digits) + 1e-15      # relative, per printed number
    mag = np.abs(s)
    if options.fmt == "RI":
        rel = half
    elif options.fmt == "MA":
        rel = half + np.abs(np.angle(s, deg=True)) * half * np.pi / 180
    else:
        db = np.abs(20 * np.log10(np.where(mag > 0, mag, 1.0)))
        rel = (db * half + db * 1e-15) * np.log(10) / 20 + np.pi * half
    return (rel + 4e-15) * mag + 1e-300


def _round_trip(sweep: Sweep, options: TouchstoneOptions) -> Sweep:
    text = format_touchstone(sweep, options)
    return parse_touchstone(text, name="prop.sNp", ports=sweep.ports).to_sweep()


@_fast
@given(sweeps(), _options)
def test_round_trip_within_precision(sweep, options):
    back = _round_trip(sweep, options)
    err = np.abs(back.s - sweep.s)
    assert np.all(err <= expected_error(sweep.s, options)), (err.max(), options)
    ferr = np.abs(back.freq_hz - sweep.freq_hz)
    assert np.all(ferr <= 1e-12 * sweep.freq_hz)
    assert np.all(np.diff(back.freq_hz) > 0)
    assert dict(back.meta) == dict(sweep.meta) and back.z0 == sweep.z0


@_fast
@given(sweeps(), st.sampled_from(["1.1", "2.0"]), st.sampled_from(["Hz", "kHz", "MHz", "GHz"]))
def test_full_precision_ri_is_bit_exact(sweep, version, unit):
    back = _round_trip(sweep, TouchstoneOptions(version=version, freq_unit=unit, precision="full"))
    assert back.s.view(np.uint64).tolist() == sweep.s.view(np.uint64).tolist()  # incl. -0.0
    assert back.freq_hz.tolist() == sweep.freq_hz.tolist()


@_fast
@given(sweeps(), st.sampled_from(["Hz", "GHz"]))
def test_default_precision_meets_1e_12_relative_in_ri(sweep, unit):
    back = _round_trip(sweep, TouchstoneOptions(freq_unit=unit))
    assert np.all(np.abs(back.s - sweep.s) <= 1e-12 * np.abs(sweep.s) + 1e-300)


@settings(max_examples=25, deadline=None)
@given(st.integers(1, 4), st.sampled_from(["Z", "Y"]), st.sampled_from(["1.1", "2.0"]),
       st.integers(0, 10**6))
def test_y_z_files_round_trip_to_the_same_s(ports, parameter, version, seed):
    # |S| well inside the unit circle keeps Z and Y well conditioned
    sweep = random_sweep(5, ports, seed, z0=tuple(np.linspace(25, 100, ports)), scale=0.1)
    options = TouchstoneOptions(version=version, parameter=parameter)
    back = _round_trip(sweep, options)
    np.testing.assert_allclose(back.s, sweep.s, rtol=0, atol=1e-12)
