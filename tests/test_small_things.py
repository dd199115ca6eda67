"""Small things found by people trying the tool: help that points to real options,
operations that print something useful, messages that say what was used."""

from __future__ import annotations

import re

import pytest

from acquire.cli import build_parser, main
from simulators.control import operations
from simulators.server import SimServer


def fixture_help(capsys) -> str:
    with pytest.raises(SystemExit):
        build_parser().parse_args(["fixture", "--help"])
    return capsys.readouterr().out


def test_fixture_help_lists_every_operation_and_no_missing_option(capsys):
    text = fixture_help(capsys)
    for op in operations():
        assert re.search(rf"^  {op}\b", text, re.M), op
    # every option the help names exists (the parser accepts it)
    from acquire.cli import build_parser

    sub = next(a for a in build_parser()._actions if a.dest == "command")
    known = {o for action in sub.choices["fixture"]._actions for o in action.option_strings}
    for option in set(re.findall(r"(?<![\w-])--[a-z][a-z-]+", text)):
        assert option in known, option


def test_fixture_restore_and_trigger_say_what_they_did(capsys):
    with SimServer(time_scale=0.0) as sim:
        host, port = sim.control_address
        assert main(["fixture", f"{host}:{port}", "disturb"]) == 0
        capsys.readouterr()
        assert main(["fixture", f"{host}:{port}", "restore"]) == 0
        out = capsys.readouterr().out.strip()
    assert out == "restore: done; the fixture is back where it was (no disturbance)"
    assert "null" not in out


def test_demo_starts_clean_and_never_removes_other_files(tmp_path, capsys):
    from acquire.demo.context import DemoError
    from acquire.demo.run import MARKER, prepare_folder

    root = tmp_path / "demo-output"
    prepare_folder(root)
    assert (root / MARKER).is_file()
    (root / "results").mkdir()
    (root / "results" / "old.s1p").write_text("! an earlier demo's capture\n")
    capsys.readouterr()
    prepare_folder(root)  # the second run
    assert "holds an earlier demo's files; removing them to start clean" in \
        capsys.readouterr().out
    assert sorted(p.name for p in root.iterdir()) == [MARKER]
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "thesis.txt").write_text("keep me")
    with pytest.raises(DemoError, match="holds files the demo did not make"):
        prepare_folder(mine)
    assert (mine / "thesis.txt").read_text() == "keep me"


def test_shipped_plans_match_the_first_session():
    from acquire.library import library_dir
    from acquire.plan import load_plan

    line = load_plan(library_dir("plans") / "patch-line-a.yaml")
    assert [c.kind for c in line.checks] == ["mask", "bandwidth", "resonance"]
    assert line.output.name == "{plan}-{serial}-{time}"
    cable = load_plan(library_dir("plans") / "cable-line.yaml")
    assert [c.name for c in cable.checks] == ["mask cable-6g"]
    assert cable.calibration is not None and cable.calibration.method == "two-port"


def test_default_file_name_has_the_serial_and_run_says_when_none_was_given(tmp_path, capsys):
    import yaml

    from acquire.library import library_dir

    data = yaml.safe_load((library_dir("plans") / "whip-915.yaml").read_text())
    data["output"] = {"dir": str(tmp_path / "out")}  # no name template: the default
    with SimServer(time_scale=0.0) as sim:
        sim.bench.set_device("whip-915")
        data["instrument"] = {"resource": sim.tcp_resource, "dialect": "scpi-generic"}
        data["stimulus"]["if_bandwidth"] = "1 kHz"
        plan = tmp_path / "whip.yaml"
        plan.write_text(yaml.safe_dump(data))
        assert main(["run", str(plan), "--serial", "W-0042"]) == 0
        assert main(["run", str(plan)]) == 0
    names = sorted(p.name for p in (tmp_path / "out").glob("*.s1p"))
    assert names[0].startswith("whip-915-W-0042-") and names[1].startswith("whip-915-unit-")
    out = capsys.readouterr().out
    assert out.count("no --serial given") == 1 and "named with 'unit'" in out
