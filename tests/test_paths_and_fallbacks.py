"""One path rule and no quiet fallbacks, end to end against the simulator.

Paths written in a plan are taken from the plan's folder, paths on the command line from
the working folder; a plan's cal store does not move with ``--output`` or with the working
folder; every "run this" hint is a command that works (each test runs the hint it got);
a corrupt newest cal set is reported, not skipped quietly."""

from __future__ import annotations

import json
import re
import shlex
from pathlib import Path

import pytest
import yaml
from test_station_support import GOOD, install_cal, write_plan

from acquire.cli import main
from acquire.library import library_dir
from acquire.plan import load_plan
from simulators.server import SimServer

DEAD = "TCPIP::127.0.0.1::1::SOCKET"  # nothing listens there


@pytest.fixture
def sim():
    with SimServer() as server:
        yield server


def line_plan(folder: Path, resource: str = DEAD) -> Path:
    """The shipped patch line plan in a folder whose name has a space, switched standards,
    output.dir as shipped (relative: results/patch-line-a)."""
    folder.mkdir(parents=True, exist_ok=True)
    data = yaml.safe_load((library_dir("plans") / "patch-line-a.yaml").read_text())
    data["instrument"]["resource"] = resource
    data["calibration"]["prompt"] = "switch"
    path = folder / "patch line.yaml"
    path.write_text(yaml.safe_dump(data))
    return path


def hint(text: str, command: str) -> list[str]:
    """The backticked ``sweepd COMMAND ...`` hint in an error, as argv (without sweepd)."""
    match = re.search(rf"`(sweepd {command} [^`]*)`", text)
    assert match, text
    words = shlex.split(match.group(1))
    return words[1:]


def test_plan_paths_are_taken_from_the_plan_folder(tmp_path: Path,
                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    plan = line_plan(tmp_path / "plans")
    text = plan.read_text().replace("resource:", "resource:", 1)
    data = yaml.safe_load(text)
    data["calibration"]["dir"] = "../cal-store"
    plan.write_text(yaml.safe_dump(data))
    monkeypatch.chdir(tmp_path)
    loaded = load_plan(Path("plans") / plan.name)
    assert loaded.output.dir == tmp_path / "plans" / "results" / "patch-line-a"
    assert loaded.calibration.cal_dir == tmp_path / "plans" / ".." / "cal-store"


def test_cal_store_does_not_move_with_output_or_working_folder(
        sim: SimServer, tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
        capsys: pytest.CaptureFixture) -> None:
    """Calibrated from one folder, run from another (as an MES would) into --output lot-42:
    the run finds the cal set and writes where --output says, from the working folder."""
    plan = line_plan(tmp_path / "line plans", sim.tcp_resource)
    bench, mes = tmp_path / "bench", tmp_path / "mes"
    bench.mkdir()
    mes.mkdir()
    monkeypatch.chdir(bench)
    assert main(["calibrate", "../line plans/patch line.yaml"]) == 0
    store = tmp_path / "line plans" / "results" / "patch-line-a" / "cal"
    assert len(list(store.glob("*.calset"))) == 1
    capsys.readouterr()
    monkeypatch.chdir(mes)
    code = main(["run", str(plan), "--output", "lot-42", "--serial", "PA-0001", "--json"])
    out, err = capsys.readouterr()
    assert code in (0, 1), err
    capture = json.loads(out)["capture"]
    assert capture["calibration"] is not None and capture["warnings"] == []
    assert Path(capture["touchstone"]).parent == mes / "lot-42"
    assert (mes / "lot-42" / "journal.sqlite").is_file()


def test_the_calibrate_hint_of_a_run_without_cal_works_as_printed(
        sim: SimServer, tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
        capsys: pytest.CaptureFixture) -> None:
    """The plan names a dead address and the run overrides it with --resource: the hint
    must carry the override, and quote the plan path (it has a space)."""
    plan = line_plan(tmp_path / "line plans")
    monkeypatch.chdir(tmp_path)
    run = ["run", "line plans/patch line.yaml", "--resource", sim.tcp_resource,
           "--output", "out"]
    assert main(run) == 2
    err = capsys.readouterr().err
    assert "no calibration for plan patch-line-a" in err
    argv = hint(err, "calibrate")
    assert argv == ["calibrate", "line plans/patch line.yaml", "--resource", sim.tcp_resource]
    assert main(argv) == 0
    capsys.readouterr()
    assert main(run) in (0, 1)
    assert "cal 2" in capsys.readouterr().out  # corrected with the cal set just made
    assert plan.exists()


def test_the_golden_hint_of_measure_works_as_printed(sim: SimServer, tmp_path: Path,
                                                      capsys: pytest.CaptureFixture) -> None:
    """With --output and --resource given, the golden re-check the error asks for must
    land in the same journal, on the same instrument."""
    install_cal(tmp_path / "out")
    plan = write_plan(tmp_path, DEAD, station={"golden": {"every_units": 5}})
    call = ["measure", str(plan), "--serial", GOOD[0], "--resource", sim.tcp_resource,
            "--output", str(tmp_path / "lot-7")]
    sim.bench.select_unit(GOOD[0])
    assert main(call) == 2
    err = capsys.readouterr().err
    assert "golden check due" in err
    sim.bench.select_unit("GOLDEN")
    assert main(hint(err, "measure")) == 0
    sim.bench.select_unit(GOOD[0])
    capsys.readouterr()
    assert main(call) == 0, capsys.readouterr().err


def test_a_corrupt_newest_cal_set_is_reported_not_skipped_quietly(
        sim: SimServer, tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    good = install_cal(tmp_path / "out", age_s=60.0)
    newer = good.with_name("2999" + good.name[4:].replace(good.stem[-10:], "0123456789"))
    newer.write_bytes(good.read_bytes()[: good.stat().st_size // 2])  # truncated copy
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
    sim.bench.select_unit(GOOD[0])
    run = ["run", str(plan), "--serial", GOOD[0], "--output", str(tmp_path / "out")]
    assert main(run) == 0
    out = capsys.readouterr().out
    assert f"warning: newer cal set {newer.name} cannot be used" in out
    assert f"applying the older {good.stem}" in out
    assert main([*run, "--json"]) == 0
    capture = json.loads(capsys.readouterr().out)["capture"]
    assert any(newer.name in w for w in capture["warnings"])
    assert any(newer.name in w for w in capture["calibration"]["warnings"])
    code = main(["measure", str(plan), "--serial", GOOD[1], "--json"])
    data = json.loads(capsys.readouterr().out)
    assert code in (0, 1) and any(newer.name in w for w in data["warnings"])


def test_resume_with_nothing_to_resume_says_so(sim: SimServer, tmp_path: Path,
                                               capsys: pytest.CaptureFixture) -> None:
    plan = line_plan(tmp_path, sim.tcp_resource)
    code = main(["calibrate", str(plan), "--resume", "--prompt", "scripted", "--script", "a"])
    out, err = capsys.readouterr()
    assert code == 2
    assert "note: no unfinished calibration in" in out and "starting afresh" in out
    assert "nothing was measured" in err and "kept" not in err


def test_an_abort_before_any_step_keeps_no_claim_of_kept_steps(
        sim: SimServer, tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    plan = line_plan(tmp_path, sim.tcp_resource)
    base = ["calibrate", str(plan), "--prompt", "scripted", "--script"]
    assert main([*base, "a"]) == 2
    out, err = capsys.readouterr()
    assert "Measured steps kept" not in out and "measured steps kept" not in err
    assert err.rstrip().endswith("nothing was measured")
    assert main([*base, "open,a"]) == 2  # one step measured: kept for --resume
    assert "measured steps kept in" in capsys.readouterr().err
    assert main([*base, "a"]) == 2  # a new run aborted at once leaves the earlier steps
    err = capsys.readouterr().err
    assert "nothing was measured in this run" in err and "is untouched" in err
