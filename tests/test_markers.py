"""Markers asked for on ``plot`` and ``check``: at frequencies and at features, with a
value in every quantity.

Reference values are worked out here in closed form from circuit models, not from our
own code:
- series RLC antenna model Z = R + j(wL - 1/(wC)): resonance where X = 0, f0 = 1/(2 pi
  sqrt(LC)) (any circuits text, e.g. Pozar, Microwave Engineering, 4th ed., sec. 6.1);
- Gamma = (Z - Z0)/(Z + Z0), SWR = (1 + |Gamma|)/(1 - |Gamma|), RL = -20 log10|Gamma|
  (Pozar ch. 2);
- a pure delay exp(-j w tau) has group delay tau (definition, -d(phase)/d(w));
- a first-order low-pass 1/(1 + j f/fc) is 3 dB down at fc (definition of the corner).
scikit-rf (an outside implementation) cross-checks impedance, SWR and group delay.
"""

from __future__ import annotations

import argparse
import json

import numpy as np
import pytest

from acquire.commands import check as check_cmd
from acquire.metrics.errors import MetricError
from acquire.metrics.markers import parse_marker_spec, sweep_markers
from acquire.plotting import render
from acquire.sweep import Sweep

F = np.linspace(2.3e9, 2.6e9, 301)
R, Q, F0 = 45.0, 12.0, 2.45e9
L = Q * R / (2 * np.pi * F0)
C = 1 / ((2 * np.pi * F0) ** 2 * L)


def z_antenna(f):
    w = 2 * np.pi * np.asarray(f)
    return R + 1j * (w * L - 1 / (w * C))


def antenna(f):
    z = z_antenna(f)
    return (z - 50) / (z + 50)


def x_frequencies(x):
    """Both frequencies where the series RLC has reactance +x and -x (quadratic in w)."""
    out = []
    for target in (-x, x):  # wL - 1/(wC) = target  ->  L w^2 - target w - 1/C = 0
        w = (target + np.sqrt(target**2 + 4 * L / C)) / (2 * L)
        out.append(w / (2 * np.pi))
    return out


def test_feature_markers_match_the_circuit():
    readouts = sweep_markers(Sweep(F, antenna(F)), ["min", "edges"])
    res, lo, hi = readouts
    assert res.what == "minimum |S11|" and res.marker.freq_hz == pytest.approx(F0, abs=50e3)
    # |Gamma| = 1/3 (SWR 2): (R-50)^2 + X^2 = ((R+50)^2 + X^2)/9
    x = np.sqrt(((R + 50) ** 2 / 9 - (R - 50) ** 2) * 9 / 8)
    f_lo, f_hi = x_frequencies(x)
    assert lo.what == "SWR 2 low edge" and lo.marker.freq_hz == pytest.approx(f_lo, abs=100e3)
    assert hi.what == "SWR 2 high edge" and hi.marker.freq_hz == pytest.approx(f_hi, abs=100e3)
    assert lo.marker.swr == pytest.approx(2.0, abs=0.01)
    values = res.values()
    assert values["swr"] == pytest.approx(100 / 90, abs=1e-3)  # |Gamma| = 5/95
    assert values["return_loss_db"] == pytest.approx(-20 * np.log10(5 / 95), abs=0.01)
    assert values["resistance_ohm"] == pytest.approx(45.0, abs=0.05)
    assert values["reactance_ohm"] == pytest.approx(0.0, abs=0.5)


def test_level_crossings_and_frequency_markers():
    sweep = Sweep(F, antenna(F))
    down, up = sweep_markers(sweep, ["db=-10"])
    x = np.sqrt(((R + 50) ** 2 * 0.1 - (R - 50) ** 2) / 0.9)  # |Gamma|^2 = 0.1
    f_lo, f_hi = x_frequencies(x)
    assert down.what == "down through -10 dB"
    assert down.marker.freq_hz == pytest.approx(f_lo, abs=1e5)
    assert up.what == "up through -10 dB" and up.marker.freq_hz == pytest.approx(f_hi, abs=1e5)
    (at,) = sweep_markers(sweep, ["2.4GHz"])
    z = z_antenna(2.4e9)
    assert at.what == "at 2.4 GHz" and at.marker.impedance == pytest.approx(z, abs=0.05)


def test_every_quantity_agrees_with_scikit_rf():
    rf = pytest.importorskip("skrf")
    f = np.linspace(1e9, 2e9, 201)
    s = np.zeros((f.size, 2, 2), complex)
    s[:, 0, 0] = s[:, 1, 1] = antenna(f) * 0.5
    s[:, 1, 0] = s[:, 0, 1] = 0.9 * np.exp(-2j * np.pi * f * 2.5e-9)  # 2.5 ns line
    net = rf.Network(frequency=rf.Frequency.from_f(f, unit="Hz"), s=s, z0=50)
    r11, r21 = sweep_markers(Sweep(f, s), ["1.5GHz", "S21:1.5GHz"])
    k = int(np.argmin(np.abs(f - 1.5e9)))
    assert r11.marker.swr == pytest.approx(net.s_vswr[k, 0, 0], rel=1e-9)
    assert r11.marker.impedance == pytest.approx(net.s11.z[k, 0, 0], rel=1e-9)
    assert r11.marker.db == pytest.approx(net.s_db[k, 0, 0], abs=1e-9)
    assert r21.values()["group_delay_s"] == pytest.approx(2.5e-9, rel=1e-6)
    assert r21.values()["group_delay_s"] == pytest.approx(net.group_delay[k, 1, 0], rel=1e-3)
    assert "swr" not in r21.values()  # SWR and R + jX are for reflections only
    assert "delay 2.5 ns" in r21.line()


def test_transmission_maximum_and_3db_edge():
    f = np.linspace(1e6, 100e6, 991)
    fc = 20e6
    s = np.zeros((f.size, 2, 2), complex)
    s[:, 1, 0] = s[:, 0, 1] = 1 / (1 + 1j * f / fc)
    mx, edge = sweep_markers(Sweep(f, s), ["S21:max", "S21:edges"])
    assert mx.marker.freq_hz == pytest.approx(1e6) and mx.what == "maximum |S21|"
    assert edge.what == "-3 dB high edge"
    # 3 dB below the maximum at 1 MHz (not at DC): |H|^2 halves at sqrt(2 + fm^2/fc^2)... fc
    peak_db = 20 * np.log10(abs(1 / (1 + 1j * 1e6 / fc)))
    target = 10 ** ((peak_db - 3.0) / 20)
    f3 = fc * np.sqrt(1 / target**2 - 1)
    assert edge.marker.freq_hz == pytest.approx(f3, rel=1e-3)
    assert f3 == pytest.approx(fc, rel=0.01)  # the textbook corner, within 1 %


@pytest.mark.parametrize(("spec", "message"), [
    ("lowest", "expected a frequency"),
    ("S31:min", "the sweep has no S31"),
    ("Sx1:min", "not a parameter"),
    ("swr=0.5", "SWR at least 1"),
    ("loss=3", "swr=LEVEL or db=LEVEL"),
    ("3GHz", "lies outside the sweep"),
])
def test_bad_marker_specs_are_one_line_errors(spec, message):
    with pytest.raises(MetricError, match=message) as info:
        sweep_markers(Sweep(F, antenna(F)), [spec])
    assert "\n" not in str(info.value) and spec in str(info.value)


def test_spec_parsing():
    spec = parse_marker_spec("s21:db=-3")
    got = (spec.parameter, spec.kind, spec.level_quantity, spec.level)
    assert got == ("S21", "level", "db", -3)
    assert parse_marker_spec("2.45 GHz").freq_hz == 2.45e9


def test_plot_draws_the_markers_asked_for():
    readouts = sweep_markers(Sweep(F, antenna(F)), ["min", "2.4GHz"])
    fig = render(Sweep(F, antenna(F)), markers=readouts)
    match, _imped, smith = fig.axes
    assert {"1", "2"} <= {t.get_text() for t in match.texts}
    assert {"1", "2"} <= {t.get_text() for t in smith.texts}
    table = next(t.get_text() for t in smith.texts if "minimum |S11|" in t.get_text())
    assert "1 minimum |S11|  S11 2.45 GHz" in table and "SWR 1.111" in table
    assert "2 at 2.4 GHz" in table and "delay" in table
    assert not any(t.get_text() == "R" for t in match.texts)  # automatic markers replaced


def test_check_prints_markers_and_json_lists_them(tmp_path, capsys):
    from acquire.touchstone import write_touchstone

    path = tmp_path / "unit.s1p"
    write_touchstone(path, Sweep(F, antenna(F)))
    parser = argparse.ArgumentParser()
    check_cmd.add_arguments(parser)
    assert check_cmd.run(parser.parse_args(
        [str(path), "--mask", "patch-2g45", "--marker", "min", "--marker", "swr=2"])) == 0
    out = capsys.readouterr().out
    assert "marker 1 minimum |S11|  S11 2.45 GHz:  SWR 1.111" in out
    assert "marker 2 down through SWR 2" in out and "marker 3 up through SWR 2" in out
    assert check_cmd.run(parser.parse_args([str(path), "--mask", "patch-2g45", "--json",
                                            "--marker", "2.45GHz"])) == 0
    doc = json.loads(capsys.readouterr().out)
    from schema_support import validate

    validate(doc, "verdict")  # configs/schemas/verdict.schema.json describes the markers
    (mk,) = doc["markers"]
    assert mk["frequency_hz"] == 2.45e9 and mk["swr"] == pytest.approx(100 / 90, abs=1e-3)


def test_check_with_markers_only_reads_them_out(tmp_path, capsys):
    from schema_support import validate

    from acquire.touchstone import write_touchstone

    path = write_touchstone(tmp_path / "unit.s1p", Sweep(F, antenna(F)))
    parser = argparse.ArgumentParser()
    check_cmd.add_arguments(parser)
    assert check_cmd.run(parser.parse_args([str(path), "--marker", "min"])) == 0
    out = capsys.readouterr().out
    assert out.startswith(f"{path}: NONE") and "marker 1 minimum |S11|" in out
    assert check_cmd.run(parser.parse_args([str(path), "--marker", "min", "--json"])) == 0
    doc = validate(capsys.readouterr().out, "verdict")
    assert doc["verdict"] == "none" and doc["markers"][0]["what"] == "minimum |S11|"
