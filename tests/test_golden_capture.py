"""A golden capture carries the golden verdict: its file name, Touchstone comments, JSON
summary and journal row say whether the golden unit matched its reference, with the
comparison (worst deviation, where, and the limit). Against the simulator over TCP."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from schema_support import validate
from test_station_support import install_cal, rows, write_plan

from acquire.cli import main
from acquire.touchstone import read_touchstone
from simulators.server import SimServer


@pytest.fixture
def sim():
    with SimServer(time_scale=0.0, noise=False) as server:
        yield server


def golden_capture(sim: SimServer, tmp_path: Path, capsys, *, disturbed: bool
                   ) -> tuple[int, dict, Path]:
    install_cal(tmp_path / "out")
    plan = write_plan(tmp_path, sim.tcp_resource)
    if disturbed:
        sim.bench.disturb()  # the fixture moved: the golden unit no longer matches
    sim.bench.select_unit("GOLDEN")
    code = main(["measure", str(plan), "--golden", "--json"])
    data = validate(capsys.readouterr().out, "measure")
    return code, data, Path(data["files"]["touchstone"])


def test_a_failed_golden_check_is_filed_as_a_failure(sim, tmp_path, capsys) -> None:
    code, data, touchstone = golden_capture(sim, tmp_path, capsys, disturbed=True)
    assert (code, data["verdict"], data["golden_check"]["passed"]) == (1, "fail", False)
    # the file name
    assert touchstone.name.endswith("-fail.s1p"), touchstone.name
    # the Touchstone comments: the golden verdict and the comparison with its limits
    comments = read_touchstone(touchstone).comments
    assert any(c.startswith("sweepd verdict: FAIL (exit 1)") for c in comments), comments
    golden_line = next(c for c in comments if "golden GOLDEN" in c)
    assert "magnitude" in golden_line and "limit 0.5 dB" in golden_line
    assert "at S11" in golden_line and "GHz" in golden_line
    # the JSON summary: the golden check as the verdict's check, worst deviations, limits
    summary = validate(json.loads(touchstone.with_suffix(".json").read_text()), "capture")
    assert (summary["verdict"], summary["exit_code"]) == ("fail", 1)
    (check,) = summary["checks"]
    assert (check["kind"], check["verdict"]) == ("golden", "fail")
    worst = check["worst"]["magnitude_db"]
    assert worst["value"] > worst["limit"] == 0.5
    assert worst["parameter"] == "S11" and 2.3e9 <= worst["freq_hz"] <= 2.6e9
    assert check["worst"]["phase_deg"]["limit"] == 5.0
    assert check["reference"] == "patch-station-golden.s1p"
    # the unit's own checks are kept beside it, for information
    assert [c["kind"] for c in summary["metrics"]["unit_checks"]] == [
        "mask", "bandwidth", "resonance"]
    # the journal row agrees with the golden check
    (row,) = rows(tmp_path / "out", "SELECT verdict, exit_code FROM measurements")
    assert tuple(row) == ("fail", 1)
    assert rows(tmp_path / "out", "SELECT passed FROM golden_checks")[0][0] == 0


def test_a_good_golden_check_is_filed_as_a_pass(sim, tmp_path, capsys) -> None:
    code, data, touchstone = golden_capture(sim, tmp_path, capsys, disturbed=False)
    assert (code, data["verdict"]) == (0, "pass")
    assert touchstone.name.endswith("-pass.s1p")
    summary = json.loads(touchstone.with_suffix(".json").read_text())
    (check,) = summary["checks"]
    assert (check["kind"], check["verdict"]) == ("golden", "pass")
    assert check["worst"]["magnitude_db"]["value"] <= 0.5
    assert any(c.startswith("sweepd verdict: PASS") for c in read_touchstone(touchstone).comments)
