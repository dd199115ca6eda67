"""``sweepd export``: trace data as CSV. Values are compared with scikit-rf, an outside
implementation (s_db, s_deg, s_vswr, input impedance, group delay), read back with the
standard csv module as a spreadsheet would."""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest

from acquire.cli import main
from acquire.sweep import Sweep
from acquire.touchstone import write_touchstone

F = np.linspace(1e9, 2e9, 101)


def two_port():
    s = np.zeros((F.size, 2, 2), complex)
    s[:, 0, 0] = 0.2 * np.exp(-2j * np.pi * F * 1e-9) + 0.1
    s[:, 1, 1] = 0.15 * np.exp(-2j * np.pi * F * 1.3e-9)
    s[:, 1, 0] = s[:, 0, 1] = 0.9 * np.exp(-2j * np.pi * F * 2.5e-9)
    return s


def read_csv(text):
    rows = list(csv.reader(io.StringIO(text)))
    return rows[0], np.array([[float(v) if v else np.nan for v in r] for r in rows[1:]])


def test_columns_match_scikit_rf(tmp_path, capsys):
    rf = pytest.importorskip("skrf")
    s = two_port()
    path = write_touchstone(tmp_path / "jumper.s2p", Sweep(F, s))
    code = main(["export", str(path), "-q", "db", "-q", "phase", "-q", "swr", "-q", "r",
                 "-q", "x", "-q", "group-delay", "-o", "-"])
    assert code == 0
    header, data = read_csv(capsys.readouterr().out)
    net = rf.Network(frequency=rf.Frequency.from_f(F, unit="Hz"), s=s, z0=50)
    assert header[:7] == ["frequency_hz", "S11_db", "S11_phase_deg", "S11_swr", "S11_r_ohm",
                          "S11_x_ohm", "S11_group_delay_s"]
    assert "S21_swr" not in header and "S21_group_delay_s" in header  # SWR: reflections
    col = {name: data[:, i] for i, name in enumerate(header)}
    assert np.allclose(col["frequency_hz"], F, rtol=1e-9)
    assert np.allclose(col["S11_db"], net.s_db[:, 0, 0], atol=1e-6)
    assert np.allclose(col["S11_phase_deg"], net.s_deg[:, 0, 0], atol=1e-5)
    assert np.allclose(col["S22_swr"], net.s_vswr[:, 1, 1], rtol=1e-6)
    assert np.allclose(col["S11_r_ohm"], net.s11.z[:, 0, 0].real, rtol=1e-6)
    assert np.allclose(col["S11_x_ohm"], net.s11.z[:, 0, 0].imag, rtol=1e-6, atol=1e-6)
    assert np.allclose(col["S21_group_delay_s"], 2.5e-9, rtol=1e-6)
    assert np.allclose(col["S21_group_delay_s"][1:-1], net.group_delay[1:-1, 1, 0], rtol=1e-3)


def test_default_file_is_new_beside_the_input(tmp_path, capsys):
    path = write_touchstone(tmp_path / "unit.s1p", Sweep(F, two_port()[:, :1, :1]))
    assert main(["export", str(path)]) == 0
    assert main(["export", str(path), "--param", "s11", "-q", "return-loss"]) == 0
    first, second = (tmp_path / "unit.csv"), (tmp_path / "unit-2.csv")
    assert first.read_text().splitlines()[0] == "frequency_hz,S11_db,S11_phase_deg"
    assert second.read_text().splitlines()[0] == "frequency_hz,S11_return_loss_db"
    assert len(first.read_text().splitlines()) == F.size + 1
    out = capsys.readouterr().out
    assert f"{first}: 2 columns, 101 rows" in out


@pytest.mark.parametrize(("argv", "message"), [
    (["--param", "S21"], "the sweep has no S21 (it has S11)"),
])
def test_export_errors_are_one_line(tmp_path, capsys, argv, message):
    path = write_touchstone(tmp_path / "unit.s1p", Sweep(F, two_port()[:, :1, :1]))
    assert main(["export", str(path), *argv]) == 2
    err = capsys.readouterr().err
    assert message in err and len(err.strip().splitlines()) == 1


def test_reflection_quantity_of_a_transmission_is_refused(tmp_path, capsys):
    path = write_touchstone(tmp_path / "j.s2p", Sweep(F, two_port()))
    assert main(["export", str(path), "--param", "S21", "-q", "swr"]) == 2
    assert "swr is for reflections (S11, S22), not S21" in capsys.readouterr().err
