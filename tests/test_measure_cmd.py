"""``sweepd measure``: exit codes (0 pass, 1 fail, 2 error) and the stable JSON layout,
against the simulator over TCP."""

from __future__ import annotations

import json
import socket
import subprocess
import sys
from pathlib import Path

import pytest
from schema_support import validate
from test_station_support import BAD, GOOD, captures, install_cal, rows, write_plan

from acquire.cli import main
from acquire.station.measure import RESULT_KEYS
from simulators.server import SimServer


@pytest.fixture
def sim():
    with SimServer(time_scale=0.0, noise=False) as server:
        yield server


@pytest.fixture
def plan(sim, tmp_path):
    install_cal(tmp_path / "out")
    return write_plan(tmp_path, sim.tcp_resource, station={"golden": None})


def measure(capsys, plan: Path, *args: str) -> tuple[int, dict, str]:
    code = main(["measure", str(plan), "--json", *args])
    captured = capsys.readouterr()
    lines = captured.out.strip().splitlines()
    assert len(lines) == 1  # one JSON object, one line
    return code, validate(lines[0], "measure"), captured.err


def test_a_passing_unit_exits_0_with_the_documented_json(sim, plan, capsys, tmp_path) -> None:
    sim.bench.select_unit(GOOD[0])
    code, data, err = measure(capsys, plan, "--serial", GOOD[0], "--station", "mes-2")
    assert code == 0 and err == ""
    assert tuple(data) == RESULT_KEYS
    assert (data["format"], data["version"], data["plan"], data["serial"]) == (
        "sweepd-measure", 1, "patch-station", GOOD[0])
    assert (data["verdict"], data["exit_code"], data["attempt"], data["retest"]) == (
        "pass", 0, 1, False)
    assert data["station"] == "mes-2" and data["golden"] is False and data["error"] is None
    assert data["worst_margin"] > 0
    figures = data["key_figures"]
    assert set(figures) >= {"resonance_hz", "usable_bandwidth_hz", "worst_swr_in_band"}
    assert [c["kind"] for c in data["checks"]] == ["mask", "bandwidth", "resonance"]
    assert all(c["verdict"] == "pass" for c in data["checks"])
    touchstone = Path(data["files"]["touchstone"])
    assert touchstone.parent == tmp_path / "out" and touchstone.is_file()
    assert json.loads(Path(data["files"]["summary"]).read_text())["verdict"] == "pass"
    assert data["calibration"]["method"] == "one-port" and data["calibration"]["id"]
    assert data["instrument"] == "sweepd-sim,generic-2port,SIM0001,1.0"
    assert data["journal"]["path"] == str(tmp_path / "out" / "journal.sqlite")
    row = rows(tmp_path / "out", "SELECT m.id, r.kind, r.station, m.verdict, m.touchstone "
                                 "FROM measurements m JOIN runs r ON r.id = m.run_id")[0]
    assert tuple(row) == (data["journal"]["measurement_id"], "measure", "mes-2", "pass",
                          str(touchstone))


def test_a_failing_unit_exits_1_and_a_retest_is_recorded(sim, plan, capsys) -> None:
    sim.bench.select_unit(BAD[0])
    code, data, _ = measure(capsys, plan, "--serial", BAD[0])
    assert (code, data["verdict"], data["exit_code"]) == (1, "fail", 1)
    assert any(c["verdict"] == "fail" for c in data["checks"]) and data["worst_margin"] < 0
    code, again, _ = measure(capsys, plan, "--serial", BAD[0])
    assert (code, again["attempt"], again["retest"]) == (1, 2, True)
    assert again["files"]["touchstone"] != data["files"]["touchstone"]


@pytest.mark.parametrize(("serial", "message"), [
    ("PA/0001", "holds a path separator"),
    ("..", "holds '..'"),
    ("PA-00\x1b1", "control character 0x1b"),
    ("X" * 300, "is too long"),
    ("PA-1", "does not match the pattern"),
])
def test_a_bad_serial_exits_2_with_json_and_one_line(plan, capsys, tmp_path, serial,
                                                     message) -> None:
    code, data, err = measure(capsys, plan, "--serial", serial)
    assert code == 2 and tuple(data) == RESULT_KEYS
    assert data["verdict"] is None and data["exit_code"] == 2 and message in data["error"]
    assert err.startswith("sweepd: error: serial ") and err.count("\n") == 1
    assert not (tmp_path / "out" / "journal.sqlite").exists()  # refused before anything


def test_errors_at_the_instrument_exit_2_and_are_journalled(sim, tmp_path, capsys) -> None:
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
    code, data, _ = measure(capsys, plan, "--serial", GOOD[0])  # no cal set in out/cal
    assert code == 2 and "no calibration for plan patch-station" in data["error"]
    with socket.socket() as s:  # a port nobody listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    code, data, _ = measure(capsys, plan, "--serial", GOOD[0], "--resource",
                            f"TCPIP::127.0.0.1::{port}::SOCKET")
    assert code == 2 and data["error"]
    runs = rows(tmp_path / "out", "SELECT state FROM runs ORDER BY id")
    assert [r[0] for r in runs] == ["failed", "failed"]
    assert len(rows(tmp_path / "out", "SELECT id FROM faults")) == 2
    assert not captures(tmp_path / "out")


def test_the_golden_unit_gates_measure(sim, tmp_path, capsys) -> None:
    install_cal(tmp_path / "out")
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": {"every_units": 2}})
    sim.bench.select_unit(GOOD[0])
    code, data, _ = measure(capsys, plan, "--serial", GOOD[0])
    assert code == 2 and "golden check due: no golden check on record" in data["error"]
    sim.bench.select_unit("GOLDEN")
    code, data, _ = measure(capsys, plan, "--golden")
    assert (code, data["golden"], data["verdict"], data["golden_check"]["passed"]) == (
        0, True, "pass", True)
    for serial in GOOD[:2]:
        sim.bench.select_unit(serial)
        assert measure(capsys, plan, "--serial", serial)[0] == 0
    code, data, _ = measure(capsys, plan, "--serial", GOOD[2])
    assert code == 2 and "2 units since the last good golden check" in data["error"]
    sim.bench.disturb()
    sim.bench.select_unit("GOLDEN")
    code, data, _ = measure(capsys, plan, "--golden")
    assert (code, data["verdict"], data["exit_code"]) == (1, "fail", 1)
    assert "OUT OF TOLERANCE" in data["golden_check"]["message"]
    sim.bench.select_unit(GOOD[2])
    code, data, _ = measure(capsys, plan, "--serial", GOOD[2])
    assert code == 2 and data["error"].startswith("line stopped: the golden check at")
    sim.bench.restore()
    sim.bench.select_unit("GOLDEN")
    assert measure(capsys, plan, "--golden")[0] == 0
    sim.bench.select_unit(GOOD[2])
    assert measure(capsys, plan, "--serial", GOOD[2])[0] == 0
    golden = rows(tmp_path / "out", "SELECT passed FROM golden_checks ORDER BY id")
    assert [g[0] for g in golden] == [1, 0, 1]


def test_names_never_escape_or_clash(sim, tmp_path, capsys) -> None:
    install_cal(tmp_path / "out")
    plan = write_plan(tmp_path, sim.tcp_resource,
                      station={"golden": None, "serial": {"pattern": ".+", "max_length": 40}})
    paths = []
    for serial in ("A:B", "A?B", "A*B"):  # all three sanitise to A_B
        code, data, _ = measure(capsys, plan, "--serial", serial)
        assert code in (0, 1), data["error"]
        paths.append(Path(data["files"]["touchstone"]))
    assert len(set(paths)) == 3
    assert all(p.parent == tmp_path / "out" and "A_B" in p.name for p in paths)
    assert measure(capsys, plan, "--serial", "../../x")[0] == 2


def test_text_output_and_real_exit_codes_of_the_process(sim, plan, tmp_path) -> None:
    def sweepd(*args: str) -> subprocess.CompletedProcess:
        return subprocess.run([sys.executable, "-m", "acquire.cli", "measure", str(plan), *args],
                              capture_output=True, text=True, timeout=60)

    sim.bench.select_unit(GOOD[1])
    done = sweepd("--serial", GOOD[1])
    assert done.returncode == 0 and done.stdout.startswith(f"PASS {GOOD[1]}, worst margin +")
    sim.bench.select_unit(BAD[1])
    done = sweepd("--serial", BAD[1], "--json")
    assert done.returncode == 1 and json.loads(done.stdout)["verdict"] == "fail"
    done = sweepd("--serial", "PA/1")
    assert done.returncode == 2 and done.stdout == ""
    assert done.stderr == "sweepd: error: serial 'PA/1' holds a path separator '/'\n"
