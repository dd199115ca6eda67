"""Distance-domain checks on a captured sweep: ``sweepd run`` against the simulator.

The simulator's raw reflection of a short at the end of its port-1 test cable is the
truth here, from its own independently written physics (simulators/errorbox.py and
simulators/calkit.py): round-trip delay = the port's internal delay (round trip) plus
twice the test cable's one-way delay plus twice the short's offset delay.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from schema_support import one_json_object, validate

from acquire.cli import main
from acquire.touchstone import read_touchstone
from simulators.calkit import load_kit
from simulators.errorbox import PORT1
from simulators.server import SimServer

C0 = 299_792_458.0
SPAN = 6e9 - 6e6
PLAN = """\
plan: feeder-raw
instrument: {resource: "TCPIP::127.0.0.1::5025::SOCKET"}
stimulus: {start: 6 MHz, stop: 6 GHz, points: 1000, power: 0 dBm, if_bandwidth: 10 kHz}
calibration: {method: none}
dtf: {velocity_factor: 1.0}
checks:
  - distance:
      zones:
        - {name: port, from: 0 m, to: 1 m, lower: 20 dB}
        - {name: beyond, from: 1 m, to: end, lower: LIMIT}
"""


def _short_distance_m() -> float:
    one_way_s = PORT1.internal_delay_s / 2 + PORT1.cable_delay_s
    one_way_s += load_kit().offsets["short"].delay_s
    return C0 * one_way_s  # velocity factor 1.0 in the plan


@pytest.mark.parametrize(("limit", "code"), [("1 dB", 0), ("10 dB", 1)])
def test_run_judges_a_captured_sweep_in_the_distance_domain(
        tmp_path: Path, capsys: pytest.CaptureFixture, limit: str, code: int) -> None:
    plan = tmp_path / "plan.yaml"
    plan.write_text(PLAN.replace("LIMIT", limit))
    with SimServer() as sim:
        sim.bench.connect("short")
        assert main(["run", str(plan), "--resource", sim.tcp_resource,
                     "--output", str(tmp_path / "out"), "--json"]) == code
    summary = validate(one_json_object(capsys.readouterr().out), "capture")
    (check,) = summary["checks"]
    assert check["kind"] == "distance" and check["verdict"] == ("pass", "fail")[code]
    strongest = max(check["peaks"], key=lambda p: p["level_db"])
    assert abs(strongest["distance_m"] - _short_distance_m()) < C0 / (2 * SPAN)  # one bin
    assert check["zones"][1]["worst"]["distance_m"] == strongest["distance_m"]
    # The capture carries the verdict, and sweepd dtf on the file agrees.
    path = summary["capture"]["touchstone"]
    assert any("distance" in c for c in read_touchstone(path).comments)
    assert main(["dtf", path, "--plan", str(plan), "--json"]) == code
    again = validate(one_json_object(capsys.readouterr().out), "dtf")
    assert len(again["peaks"]) == len(check["peaks"])
    for ours, theirs in zip(again["peaks"], check["peaks"], strict=True):
        assert ours["distance_m"] == pytest.approx(theirs["distance_m"], abs=1e-9)
        assert ours["level_db"] == pytest.approx(theirs["level_db"], abs=1e-6)
