"""The command backend speaks the site fixture tool's names (``calibration.switch.names``):
our standard names stay fixed; the tool may call the device ``dut`` or the thru
``through``. Names are checked words, so each stays one argument of a command run
without a shell."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from test_calibrate_parts import _recorder
from test_calibrate_sim import _cal, _device_error, _plan, _relay

from acquire.errors import CalError, PlanError
from acquire.guided.connectors import CommandConnector
from acquire.plan import load_plan
from simulators.server import SimServer


def test_the_tool_gets_its_own_names(tmp_path: Path) -> None:
    connector = CommandConnector(_recorder(tmp_path) + " connect {standard}",
                                 names={"device": "dut", "thru": "through"})
    connector.connect("device")
    assert json.loads((tmp_path / "argv.json").read_text()) == ["connect", "dut"]
    connector.connect("open")  # not mapped: our own name
    assert json.loads((tmp_path / "argv.json").read_text()) == ["connect", "open"]
    assert "(device as dut, thru as through)" in connector.description


@pytest.mark.parametrize(("names", "words"), [
    ({"device": "dut; rm -rf x"}, "switch names: device: must be 1-32 letters"),
    ({"device": "two words"}, "switch names: device: must be 1-32 letters"),
    ({"device": ""}, "switch names: device: must be 1-32 letters"),
    ({"dut": "device"}, "switch names: 'dut' is not one of open, short, load, thru, device"),
])
def test_bad_names_are_refused(tmp_path: Path, names: dict, words: str) -> None:
    with pytest.raises(CalError, match=words.replace("(", r"\(")):
        CommandConnector("tool {standard}", names=names)


def _names_plan(tmp_path: Path, names: str) -> Path:
    return _plan(tmp_path, calibration="method: one-port\n"
                 f"switch: {{command: 'tool {{standard}}', names: {names}}}")


def test_the_plan_names_the_key_of_a_bad_name(tmp_path: Path) -> None:
    assert load_plan(_names_plan(tmp_path, "{device: dut}")).calibration.switch_names == {
        "device": "dut"}
    with pytest.raises(PlanError, match=r"calibration\.switch\.names\.device: must be 1-32"):
        load_plan(_names_plan(tmp_path, "{device: 'a b'}"))
    with pytest.raises(PlanError, match=r"calibration\.switch\.names: unknown key 'dut'"):
        load_plan(_names_plan(tmp_path, "{dut: x}"))


def test_a_calibration_through_a_tool_that_says_dut(tmp_path: Path) -> None:
    with SimServer(time_scale=0.0, noise=False) as sim:
        # the site's relay tool knows 'dut', never 'device': it fails on our own name
        command = _relay(tmp_path, sim, (
            "site = {'dut': 'device', 'open': 'open', 'short': 'short', 'load': 'load'}\n"
            "if sys.argv[1] not in site:\n"
            "    print('unknown position ' + sys.argv[1], file=sys.stderr)\n"
            "    sys.exit(2)\n"
            "sys.exit(main([ADDRESS, 'connect', site[sys.argv[1]]]))\n"))
        plan_path = _plan(tmp_path, calibration=(
            f'method: one-port\nswitch: {{command: "{command}", names: {{device: dut}}}}'))
        outcome, text = _cal(plan_path, sim, tmp_path / "out", script=None)
        assert outcome.exit_code == 0, text
        assert sim.bench.connected == "device"  # switched back to the device, as 'dut'
        assert _device_error(plan_path, sim, outcome.calset, sim.tcp_resource)[0] < 1e-3
