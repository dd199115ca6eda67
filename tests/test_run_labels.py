"""``--lot`` and ``--operator`` on ``sweepd run``, ``measure`` and ``station``: recorded
with the run in the journal; bad values refused with one line naming the option, before
anything is measured."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest
from test_station_support import GOOD, install_cal, rows, write_plan

from acquire.cli import main
from acquire.journal.labels import check_lot, check_operator
from simulators.server import SimServer


@pytest.fixture
def plan(tmp_path):
    with SimServer(time_scale=0.0, noise=False) as sim:
        install_cal(tmp_path / "out")
        yield write_plan(tmp_path, sim.tcp_resource, station={"golden": None})


@pytest.mark.parametrize("command", ["run", "measure"])
def test_lot_and_operator_are_recorded_with_the_run(plan, tmp_path, capsys, command) -> None:
    code = main([command, str(plan), "--serial", GOOD[0], "--lot", "LOT-2026-49",
                 "--operator", "Ana Lima", "--json"])
    assert code == 0, capsys.readouterr()
    (run,) = rows(tmp_path / "out", "SELECT kind, lot, operator, state FROM runs")
    assert tuple(run) == (command, "LOT-2026-49", "Ana Lima", "finished")


def test_without_them_the_run_records_none(plan, tmp_path, capsys) -> None:
    assert main(["measure", str(plan), "--serial", GOOD[0], "--json"]) == 0
    (run,) = rows(tmp_path / "out", "SELECT lot, operator FROM runs")
    assert tuple(run) == (None, None)


BAD_VALUES = [("--lot", "LOT 7"), ("--lot", "../etc"), ("--lot", "x" * 65), ("--lot", ""),
              ("--operator", ""), ("--operator", "Ana\nrm -rf"), ("--operator", "y" * 65),
              ("--operator", "   ")]


@pytest.mark.parametrize(("option", "value"), BAD_VALUES)
@pytest.mark.parametrize("command", ["run", "measure"])
def test_a_bad_value_is_one_line_naming_the_option_and_nothing_is_measured(
        plan, tmp_path, capsys, command, option, value) -> None:
    code = main([command, str(plan), "--serial", GOOD[0], option, value])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and option in err and "Traceback" not in err
    assert not list((tmp_path / "out").glob("*.s1p"))


def test_measure_json_reports_a_bad_lot_as_one_object(plan, capsys) -> None:
    assert main(["measure", str(plan), "--serial", GOOD[0], "--lot", "a/b", "--json"]) == 2
    out = capsys.readouterr().out.strip().splitlines()
    assert len(out) == 1 and "--lot" in json.loads(out[0])["error"]


def test_station_refuses_a_bad_lot_in_one_line(plan) -> None:
    proc = subprocess.run([sys.executable, "-m", "acquire.cli", "station", str(plan),
                           "--station", "bench-7", "--lot", "LOT 7"],
                          input="", capture_output=True, text=True, timeout=60)
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and "--lot" in proc.stderr, proc.stderr


def test_the_rules_accept_what_a_line_uses() -> None:
    assert check_lot("LOT-2026-49") == "LOT-2026-49" and check_lot("a" * 64)
    assert check_lot(None) is None and check_operator(None) is None
    assert check_operator("Ana Lima") == "Ana Lima"
