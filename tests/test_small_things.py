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
    # every option the help names exists
    for option in set(re.findall(r"(?<![\w-])--[a-z][a-z-]+", text)):
        assert option == "--help", option


def test_fixture_restore_and_trigger_say_what_they_did(capsys):
    with SimServer(time_scale=0.0) as sim:
        host, port = sim.control_address
        assert main(["fixture", f"{host}:{port}", "disturb"]) == 0
        capsys.readouterr()
        assert main(["fixture", f"{host}:{port}", "restore"]) == 0
        out = capsys.readouterr().out.strip()
    assert out == "restore: done; the fixture is back where it was (no disturbance)"
    assert "null" not in out
