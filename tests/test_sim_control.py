"""Control channel round trips, its command line, and the simulator as a subprocess
(``python -m simulators`` and ``sweepd sim``): printed resources, signals, clean exit."""

from __future__ import annotations

import json
import os
import re
import signal
import socket
import subprocess
import sys
from pathlib import Path

import pytest
from test_sim_support import RawClient

from simulators.control import ControlError, SimControl, main, parse_args
from simulators.server import SimServer

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture
def sim():
    with SimServer() as server:
        yield server


@pytest.fixture
def ctl(sim):
    with SimControl(*sim.control_address) as client:
        yield client


def test_round_trips(sim, ctl):
    assert ctl.call("ping") == "pong"
    assert ctl.connect("short") == "short" and sim.bench.connected == "short"
    dev = ctl.set_device("whip-915", q=12)
    assert dev["kind"] == "resonator" and dev["q"] == 12 and sim.bench.device.f0_hz == 915e6
    unit = ctl.select_unit("SN-0042")
    assert unit == sim.bench.lot.unit("SN-0042") and sim.bench.state()["serial"] == "SN-0042"
    assert ctl.noise(True) is True and sim.bench.noise
    assert ctl.time_scale(0.5) == 0.5 and sim.time_scale == 0.5
    assert ctl.call("clock", rate=0, advance=100.0) == pytest.approx(
        sim.clock.now()) and sim.clock.rate == 0
    assert ctl.arm("stall", seconds=1, count=2)["count"] == 2
    assert ctl.schedule(every=5, kind="drop")["schedule"][0]["every"] == 5
    assert ctl.call("clear_faults") == {"armed": [], "schedule": [], "fired": []}
    assert ctl.drift(period_s=600, amplitude_c=2, tempco_hz_per_c=-40e3)["period_s"] == 600
    assert ctl.disturb(delay_s=1e-11)["delay_s"] == 1e-11
    assert ctl.call("restore") is None and sim.bench.state()["disturbance"] is None
    lot = ctl.call("lot", name="whip-915", seed=7)
    assert lot["kind"] == "whip-915" and lot["seed"] == 7
    state = ctl.state()
    assert state["bench"]["device"]["kind"] == "resonator"
    assert state["instrument"]["identity"].startswith("sweepd-sim")
    assert state["resources"] == [sim.tcp_resource]


def test_errors_are_one_line_and_keep_the_connection(ctl):
    with pytest.raises(ControlError, match="unknown op 'melt'"):
        ctl.call("melt")
    with pytest.raises(ControlError, match="cannot connect 'lid'"):
        ctl.connect("lid")
    with pytest.raises(ControlError, match="device resonator: unknown parameter 'qq'"):
        ctl.set_device("resonator", qq=3)
    with pytest.raises(ControlError, match="bad arguments"):
        ctl.call("connect", wat="open")
    with pytest.raises(ControlError, match="fault: unknown kind"):
        ctl.arm("melt")
    assert ctl.call("ping") == "pong"


def test_raw_protocol_lines(sim):
    with socket.create_connection(sim.control_address, timeout=3) as sock:
        sock.sendall(b'not json\n{"op": "ping"}\n{"op": "connect", "what": "open"}\n')
        reader = sock.makefile("rb")
        lines = [json.loads(reader.readline()) for _ in range(3)]
    assert lines[0]["ok"] is False and "not JSON" in lines[0]["error"]
    assert lines[1:] == [{"ok": True, "result": "pong"}, {"ok": True, "result": "open"}]


def test_external_trigger_through_control(sim, ctl):
    with RawClient(sim.tcp_resource) as c:
        c.write(":TRIG:SOUR EXT;:SWE:POIN 11;:INIT")
        assert c.query("*OPC?") == "1"
        ctl.call("trigger")
        assert len(c.query(":TRAC? S11").split(",")) == 22
        with pytest.raises(ControlError, match="Trigger ignored"):
            ctl.call("trigger")


def test_command_line_parsing():
    assert parse_args(["connect", "open"]) == ("connect", {"what": "open"})
    assert parse_args(["device", "whip-915", "q=12", "topology=series"]) == (
        "device", {"kind": "whip-915", "params": {"q": 12, "topology": "series"}})
    assert parse_args(["arm", "drop", "count=2"]) == ("arm", {"kind": "drop", "count": 2})
    assert parse_args(["schedule", "at=3:drop,7:stall"]) == (
        "schedule", {"at": [[3, "drop"], [7, "stall"]]})
    assert parse_args(["time-scale", "0.5"]) == ("time_scale", {"value": "0.5"})
    with pytest.raises(ControlError, match="expected key=value"):
        parse_args(["arm", "drop", "bad"])


def test_command_line_main(sim, capsys):
    host, port = sim.control_address
    assert main([f"{host}:{port}", "connect", "load"]) == 0
    assert json.loads(capsys.readouterr().out) == "load"
    assert main([f"{host}:{port}", "noise", "on"]) == 0
    assert sim.bench.noise is True
    assert main([f"{host}:{port}", "connect", "lid"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "error:" in err and "cannot connect 'lid'" in err
    assert main(["nohost", "state"]) == 2
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        free = probe.getsockname()[1]
    assert main([f"127.0.0.1:{free}", "ping"]) == 2
    assert "Connection refused" in capsys.readouterr().err


def _spawn(args: list[str]) -> subprocess.Popen:
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.Popen([sys.executable, *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, cwd=ROOT, env=env)


# ``sweepd sim`` is acquire.commands.sim behind the CLI dispatcher; run the module itself
SWEEPD_SIM = ("import argparse, sys; from acquire.commands import sim; "
              "p = argparse.ArgumentParser(prog='sweepd sim'); sim.add_arguments(p); "
              "sys.exit(sim.run(p.parse_args(sys.argv[1:])))")


@pytest.mark.parametrize("entry", [["-m", "simulators"], ["-c", SWEEPD_SIM]])
def test_subprocess_prints_resources_and_exits_on_signal(entry):
    proc = _spawn([*entry, "--port", "0", "--serial", "--no-noise", "--time-scale", "0",
                   "--personality", "tabletop"])
    try:
        tcp = proc.stdout.readline().strip()
        asrl = proc.stdout.readline().strip()
        hislip = proc.stdout.readline().strip()
        control = proc.stdout.readline().strip()
        assert tcp.startswith("TCPIP::127.0.0.1::") and tcp.endswith("::SOCKET")
        assert asrl.startswith("ASRL/dev/pts/") and asrl.endswith("::INSTR")
        assert re.fullmatch(r"TCPIP::127\.0\.0\.1::hislip0,\d+::INSTR", hislip)
        assert control.startswith("control 127.0.0.1:")
        with RawClient(tcp, terminator=b"\r\n") as c:
            assert c.query("*IDN?").startswith("sweepd-sim,tabletop")
        host, port = control.split()[1].split(":")
        with SimControl(host, int(port)) as ctl:
            assert ctl.call("ping") == "pong"
        proc.send_signal(signal.SIGTERM)
        assert proc.wait(timeout=10) == 0
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
        proc.stdout.close()
        proc.stderr.close()


def test_subprocess_bad_option_is_a_one_line_error():
    proc = _spawn(["-m", "simulators", "--device", "toaster"])
    _, err = proc.communicate(timeout=20)
    assert proc.returncode == 2
    assert err.strip().count("\n") == 0 and "unknown kind 'toaster'" in err
