"""Bring-up tools against the simulator: ``sweepd probe``, ``sweepd dialect check`` and the
instrument I/O log (``--io-log FILE``, ``-vv``).

"Nothing left changed" is checked against the simulator's own record of its settings,
data format, byte order and switch (``SimServer.state()``), not against our reading.
The identity fields follow IEEE Std 488.2 (``*IDN?``: maker, model, serial, firmware).
"""

from __future__ import annotations

import ast
import json
import re
import subprocess
import sys
from pathlib import Path

import pytest

from acquire.cli import main
from simulators.server import SimServer

ROOT = Path(__file__).resolve().parents[1]
DIALECTS = ROOT / "configs" / "dialects"


@pytest.fixture(params=[("generic", "scpi-generic"), ("tabletop", "tabletop-ascii"),
                        ("slotted", "slotted-blocks")], ids=["generic", "tabletop", "slotted"])
def sim(request):
    personality, dialect = request.param
    with SimServer(personality=personality, hislip_port=0) as server:
        server.dialect = dialect
        yield server


def _run(capsys: pytest.CaptureFixture, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_probe_identifies_drains_and_names_the_dialect(sim: SimServer,
                                                       capsys: pytest.CaptureFixture) -> None:
    sim.core.status.push(-222, "left over")
    code, out, _ = _run(capsys, "probe", sim.tcp_resource, "--timeout", "0.3", "--json")
    report = json.loads(out)
    assert code == 0 and report["match"] == sim.dialect
    assert report["identity"]["maker"] == "sweepd-sim"
    assert report["identity"]["serial"] in ("SIM0001", "SIM0002", "SIM0003")
    assert [code for code, _ in report["error_queue"] if code == -222] == [-222]  # shown ...
    assert sim.core.status.count() == 0  # ... and drained
    verdicts = {d["name"]: d["matches"] for d in report["dialects"]}
    from drivers.dialect import DIALECT_DIR

    shipped = sorted(p.stem for p in DIALECT_DIR.glob("*.yaml"))
    assert len(shipped) >= 3
    assert verdicts == {name: name == sim.dialect for name in shipped}


def test_probe_over_hislip_in_words(capsys: pytest.CaptureFixture) -> None:
    with SimServer(tcp_port=None, hislip_port=0) as sim:
        code, out, _ = _run(capsys, "probe", sim.hislip_resource, "--timeout", "0.3")
    assert code == 0
    assert "identity (*IDN?): sweepd-sim,generic-2port,SIM0001,1.0" in out
    assert "error queue (:SYST:ERR:NEXT?): empty" in out
    assert "use: instrument.dialect: scpi-generic" in out


def test_probe_lists_local_buses_without_touching_the_lan(capsys: pytest.CaptureFixture
                                                          ) -> None:
    code, out, _ = _run(capsys, "probe", "--json")
    report = json.loads(out)
    assert code == 0 and isinstance(report["resources"], list)
    assert not any(r.upper().startswith("TCPIP") for r in report["resources"])
    assert any("without --lan" in note for note in report["notes"])


def test_probe_of_nothing_is_one_line(capsys: pytest.CaptureFixture) -> None:
    code, out, err = _run(capsys, "probe", "TCPIP::127.0.0.1::1::SOCKET")
    assert code == 2 and out == "" and err.count("\n") == 1
    assert "cannot open: Connection refused" in err


def test_dialect_check_offline_explains_every_command(capsys: pytest.CaptureFixture) -> None:
    code, out, _ = _run(capsys, "dialect", "check", "scpi-generic", "--json")
    report = json.loads(out)
    assert code == 0 and report["valid"] and "steps" not in report
    keys = {c["key"]: c["command"] for c in report["commands"]}
    assert keys["settings.start.set"] == ":SENS:FREQ:STAR {value}"
    assert keys["data.traces.S21"] == ":TRAC:DATA? S21"
    assert keys["switch.set"] == ":ROUT:CLOS {standard}"
    code, out, _ = _run(capsys, "dialect", "check", str(DIALECTS / "tabletop-ascii.yaml"))
    assert code == 0 and "settings.start.set" in out and "1e+06 SI" in out


def test_dialect_check_of_a_broken_file_is_one_line(tmp_path: Path,
                                                    capsys: pytest.CaptureFixture) -> None:
    bad = tmp_path / "bad.yaml"
    bad.write_text((DIALECTS / "scpi-generic.yaml").read_text().replace(
        'trace_query: ":TRAC:DATA? {trace}"', 'trace_query: ":TRAC:DATA? {cmd}"'))
    code, out, err = _run(capsys, "dialect", "check", str(bad))
    assert code == 2 and out == "" and err.count("\n") == 1
    assert "data.trace_query" in err


def _instrument_state(sim: SimServer) -> dict:
    """What a walk must leave as found: the settings and the standard switched in."""
    state = sim.state()
    return {"settings": state["instrument"]["settings"],
            "connected": state["bench"]["connected"]}


def test_dialect_check_walks_every_command_and_leaves_nothing_changed(
        sim: SimServer, capsys: pytest.CaptureFixture, tmp_path: Path) -> None:
    sim.bench.connect("short")
    before = _instrument_state(sim)
    code, out, _ = _run(capsys, "dialect", "check", sim.dialect, "--resource",
                        sim.tcp_resource, "--timeout", "0.5", "--json", "--io-log",
                        str(tmp_path / "io.log"))
    report = json.loads(out)
    assert code == 0 and report["failed"] == 0, [s for s in report["steps"] if not s["ok"]]
    sent = [s["key"] for s in report["steps"] if s["sent"]]
    for key in ("session.identity", "settings.start.query", "settings.start.set",
                "trigger.command", "data.traces.S11", "data.traces.S22", "switch.set"):
        assert key in sent, key
    assert _instrument_state(sim) == before  # settings, and the switch is on short still
    logged = (tmp_path / "io.log").read_text()
    assert all(f"> {len(s['sent']) + 1} B" in logged for s in report["steps"][:3] if s["sent"])
    assert before["connected"] == "short"


def test_dialect_check_points_at_the_wrong_line(tmp_path: Path, capsys: pytest.CaptureFixture
                                                ) -> None:
    wrong = tmp_path / "wrong.yaml"
    wrong.write_text((DIALECTS / "scpi-generic.yaml").read_text()
                     .replace('query: ":SENS:SWE:POIN?"', 'query: ":SENS:SWE:PNTS?"')
                     .replace("S22: S22}", "S22: S33}"))
    with SimServer() as sim:
        before = _instrument_state(sim)
        code, out, _ = _run(capsys, "dialect", "check", str(wrong), "--resource",
                            sim.tcp_resource, "--timeout", "0.3")
        assert _instrument_state(sim) == before
    assert code == 1
    assert re.search(r"FAIL settings\.points\.query: sent ':SENS:SWE:PNTS\?'.*"
                     r"error -113 \"Undefined header", out), out
    assert re.search(r"FAIL data\.traces\.S22: sent ':TRAC:DATA\? S33'.*error -", out), out
    assert "ok   data.traces.S11" in out
    # the query, the restore that had no value to send back, and the S22 trace
    assert "3 command(s) failed" in out


def test_io_log_records_every_message_with_times_and_sizes(tmp_path: Path,
                                                           capsys: pytest.CaptureFixture
                                                           ) -> None:
    log = tmp_path / "io.log"
    plan = tmp_path / "plan.yaml"
    plan.write_text("plan: io-log-test\n"
                    "instrument: {resource: 'TCPIP::127.0.0.1::5025::SOCKET'}\n"
                    "stimulus: {start: 1 GHz, stop: 2 GHz, points: 401, power: -10 dBm, "
                    "if_bandwidth: 10 kHz}\n"
                    "measure: two-port\n"
                    f"output: {{dir: {tmp_path / 'out'}}}\n")
    with SimServer() as sim:
        code = main(["run", str(plan), "--resource", sim.tcp_resource, "--io-log", str(log)])
    assert code == 0
    lines = log.read_text().splitlines()
    assert lines[0].startswith("# sweepd I/O log, started ")
    events = [re.match(r"^\s*(\d+\.\d{6}) (\S+) (\S+)(?: (\d+) B (.*))?$", line)
              for line in lines[1:]]
    assert all(events), [line for line, m in zip(lines[1:], events, strict=True) if not m]
    times = [float(m[1]) for m in events]
    assert times == sorted(times)  # monotonic
    assert {m[2] for m in events} == {sim.tcp_resource}
    sent = [m for m in events if m[3] == ">"]
    assert sent[0][5] == "'*CLS\\n'" or any(m[5] == "'*IDN?\\n'" for m in sent)
    for m in sent:  # the byte count is the message's length, terminator included
        assert int(m[4]) == len(ast.literal_eval("b" + m[5]))
    blocks = [m for m in events if m[3] == "<" and m[5].startswith("block")]
    assert blocks, "the trace reads are logged"
    for m in blocks:  # summarised: header, payload size, terminator; no payload bytes
        header, size = re.match(r"block (#\d+) \+ (\d+) B binary \+ '\\n'$", m[5]).groups()
        assert int(m[4]) == len(header) + int(size) + 1 and int(header[2:]) == int(size)
    assert events[-1][3] == "close"


@pytest.mark.parametrize("where", ["before", "after"])
def test_vv_shows_the_traffic_on_stderr(tmp_path: Path, where: str) -> None:
    with SimServer() as sim:
        words = ["probe", sim.tcp_resource, "--timeout", "0.3"]
        words = ["-vv", *words] if where == "before" else [*words, "-v", "-v"]
        proc = subprocess.run([sys.executable, "-m", "acquire.cli", *words],
                              capture_output=True, text=True, timeout=60, cwd=ROOT)
    assert proc.returncode == 0, proc.stderr
    traffic = [line for line in proc.stderr.splitlines() if " sweepd.io: " in line]
    assert any(f"{sim.tcp_resource} > 6 B '*IDN?\\n'" in line for line in traffic), traffic
    assert any(" < " in line and "sweepd-sim,generic-2port" in line for line in traffic)
