"""Plan loading and validation: every problem is one line naming file and key path."""

from __future__ import annotations

from pathlib import Path

import pytest
import yaml

from acquire.errors import PlanError
from acquire.plan import TWO_PORT, load_plan

GOOD = {
    "plan": "patch-line-a",
    "description": "2.45 GHz patch antenna line (invented demo scenario)",
    "instrument": {
        "resource": "TCPIP::127.0.0.1::5025::SOCKET",
        "dialect": "scpi-generic",
        "timeout": "5 s",
    },
    "stimulus": {
        "start": "2.30 GHz", "stop": "2.60 GHz", "points": 601,
        "power": "-10 dBm", "if_bandwidth": "1 kHz",
    },
    "output": {"dir": "results", "touchstone": {"version": 2.0, "format": "RI"}},
}


def write_plan(tmp_path: Path, data: object, name: str = "plan.yaml") -> Path:
    path = tmp_path / name
    path.write_text(yaml.safe_dump(data) if not isinstance(data, str) else data)
    return path


def patched(**changes: object) -> dict:
    """GOOD with dotted-key changes applied; a value of ... deletes the key."""
    import copy

    data = copy.deepcopy(GOOD)
    for dotted, value in changes.items():
        *parents, leaf = dotted.split("__")
        node = data
        for key in parents:
            node = node.setdefault(key, {})
        if value is ...:
            node.pop(leaf, None)
        else:
            node[leaf] = value
    return data


def test_good_plan(tmp_path: Path) -> None:
    plan = load_plan(write_plan(tmp_path, GOOD))
    assert plan.name == "patch-line-a"
    s = plan.stimulus
    assert (s.start_hz, s.stop_hz, s.points, s.power_dbm, s.if_bandwidth_hz) == (
        2.30e9, 2.60e9, 601, -10.0, 1e3
    )
    assert plan.measure == ("S11",) and plan.ports == 1
    assert plan.instrument.dialect.name == "scpi-generic.yaml"
    assert plan.output.touchstone.version == "2.0"


def test_center_span_and_two_port(tmp_path: Path) -> None:
    data = patched(
        stimulus__start=..., stimulus__stop=..., stimulus__center="915 MHz",
        stimulus__span="100 MHz", measure=["S11", "S21", "S12", "S22"],
    )
    plan = load_plan(write_plan(tmp_path, data))
    assert plan.stimulus.start_hz == pytest.approx(865e6)
    assert plan.stimulus.stop_hz == pytest.approx(965e6)
    assert plan.measure == TWO_PORT and plan.ports == 2


def test_calibration_section(tmp_path: Path) -> None:
    data = patched(calibration={"method": "one-port", "kit": "generic-sma-50", "max_age": "8 h"})
    plan = load_plan(write_plan(tmp_path, data))
    assert plan.calibration is not None
    assert plan.calibration.kit.name == "generic-sma-50.yaml"
    assert plan.calibration.max_age_s == 8 * 3600


@pytest.mark.parametrize(
    ("changes", "message"),
    [
        ({"stimulus__points": "abc"}, r"stimulus\.points: must be an integer from 1 to 200001"),
        ({"stimulus__points": 0}, r"stimulus\.points: must be an integer from 1"),
        ({"stimulus__stpo": "2 GHz"}, r"stimulus: unknown key 'stpo' \(did you mean 'stop'\?\)"),
        ({"stimulus__power": "-10 dB"}, r"stimulus\.power: unknown power unit 'dB'"),
        ({"stimulus__power": "+40 dBm"}, r"stimulus\.power: must be from -150 dBm to 30 dBm"),
        ({"stimulus__if_bandwidth": ...}, r"stimulus\.if_bandwidth: is required"),
        ({"stimulus__stop": "2.2 GHz"}, r"stimulus\.stop: must be above start"),
        ({"stimulus__center": "2 GHz"}, r"stimulus: give either start and stop, or center"),
        ({"instrument__resource": "TCPIP::host::5025::SOCKET;*RST"}, r"not a supported VISA"),
        ({"instrument__resource": "http://x"}, r"instrument\.resource: not a supported VISA"),
        ({"instrument__dialect": "no-such"}, r"instrument\.dialect: no dialect named 'no-such'"),
        ({"instrument__timeout": "soon"}, r"instrument\.timeout: expected a time"),
        ({"measure": ["S11", "S21"]}, r"measure: must be \[S11\] \(one-port\) or all of"),
        ({"measure": ["S11;*RST"]}, r"measure\[0\]: must be one of S11, S21, S12, S22"),
        ({"measure": "S99"}, r"measure: must be one of"),
        ({"plan": "../etc"}, r"plan: must be 1-64 letters"),
        ({"plan": ...}, r"plan: is required"),
        ({"output__name": "{plan}/{serial}"}, r"output\.name: must be a file name"),
        ({"output__name": "{plan}-{operator}"}, r"output\.name: unknown field\(s\) \['operator'\]"),
        ({"output__touchstone": {"version": 3}}, r"touchstone\.version: must be 1.1 or 2.0"),
        ({"output__touchstone": {"format": "XY"}}, r"output\.touchstone\.format: must be one of"),
        ({"calibration": {"method": "two-step"}}, r"calibration\.method: must be one of"),
        ({"calibration": {"kit": "nokit"}}, r"calibration\.kit: no calkit named 'nokit'"),
        ({"calibration": {"prompt": "command"}}, r"calibration\.prompt: 'command' needs switch"),
        ({"calibration": {"switch": {"command": "relay go"}}}, r"must contain \{standard\}"),
        ({"extra": 1}, r"unknown key 'extra'"),
    ],
)
def test_bad_plans_get_one_line(tmp_path: Path, changes: dict, message: str) -> None:
    path = write_plan(tmp_path, patched(**changes))
    with pytest.raises(PlanError, match=message) as info:
        load_plan(path)
    text = str(info.value)
    assert "\n" not in text
    assert text.startswith(f"plan {path}: ")


@pytest.mark.parametrize(
    ("content", "message"),
    [
        ("plan: [unclosed", r"line 1, column \d+: YAML syntax error"),
        ("- a\n- b\n", r"must be a mapping of keys"),
        ("", r"must be a mapping of keys, got None"),
        ("!!python/object:os.system {}", r"YAML"),
    ],
)
def test_malformed_yaml(tmp_path: Path, content: str, message: str) -> None:
    with pytest.raises(PlanError, match=message):
        load_plan(write_plan(tmp_path, content))


def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(PlanError, match="file not found"):
        load_plan(tmp_path / "nope.yaml")


def test_shipped_plans_are_valid() -> None:
    root = Path(__file__).resolve().parents[1] / "configs" / "plans"
    plans = sorted(root.glob("*.yaml"))
    assert plans, "configs/plans must ship example plans"
    for path in plans:
        assert load_plan(path).name
