"""Calibrate, run, station and soak over HiSLIP and VXI-11 (generic personality), end to
end.

The same paths the TCP and serial tests take, through pyvisa-py's HiSLIP and VXI-11
clients and the simulator's servers. Outside reference for the corrected data: the simulator's
ground truth of the device in the fixture (independent code: its own kit reader, error
box and device models).
"""

from __future__ import annotations

import threading
from pathlib import Path

import numpy as np
import pytest
from station_driver import StationProcess
from test_soak_support import check_invariants, journal_rows, soak_plan, submit
from test_station_support import BAD, GOOD, install_cal, rows, write_plan

from acquire.cli import main
from acquire.soak.spool import Spool
from acquire.soak.worker import SoakWorker, StopSignal
from simulators.server import SimServer

ROOT = Path(__file__).resolve().parents[1]
PATCH = ROOT / "configs" / "plans" / "patch-line-a.yaml"
# sweep index -> fault, as in the TCP storm; stalls outlast the 0.4 s timeout
STORM = [
    [6, "drop"], [12, "stall", {"seconds": 0.6}], [18, "garbage"],
    [24, "truncate", {"then": "close"}], [30, "truncate", {"then": "stall"}],
    [36, "wrong_count"], [42, "error"], [48, "reboot", {"down_s": 0.3}],
]


@pytest.fixture
def sim():
    with SimServer(tcp_port=None, hislip_port=0, vxi11_port=0, time_scale=0.0,
                   noise=False) as server:
        yield server


def _resource(sim: SimServer, protocol: str) -> str:
    return sim.hislip_resource if protocol == "hislip" else sim.vxi11_resource


@pytest.mark.parametrize("protocol", ["hislip", "vxi11"])
def test_calibrate_then_run_over_the_lan(sim: SimServer, tmp_path: Path,
                                         capsys: pytest.CaptureFixture, protocol: str) -> None:
    from acquire.touchstone import read_touchstone

    resource = _resource(sim, protocol)
    patch = tmp_path / "plans" / "patch-line-a.yaml"
    patch.parent.mkdir()
    patch.write_text(PATCH.read_text())
    assert main(["calibrate", str(patch), "--resource", resource,
                 "--prompt", "switch", "--verify", "load"]) == 0
    assert "verification passed" in capsys.readouterr().out
    out = tmp_path / "out"
    assert main(["run", str(patch), "--resource", resource, "--output", str(out)]) == 0
    (path,) = out.glob("*.s1p")
    got = read_touchstone(path).to_sweep()
    truth = sim.bench.truth(got.freq_hz)[:, 0, 0]
    assert np.abs(got.param("S11") - truth).max() < 1e-3


def test_station_batch_over_hislip(sim: SimServer, tmp_path: Path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.hislip_resource)
    with StationProcess([str(plan), "--station", "bench-9"]).start() as st:
        st.expect("golden> ")
        sim.bench.select_unit("GOLDEN")
        st.send("")
        assert "GOLDEN CHECK PASSED" in st.expect("serial> ")
        for serial in (GOOD[0], BAD[0]):
            sim.bench.select_unit(serial)
            st.send(serial)
            want = "PASS" if serial in GOOD else "FAIL"
            assert f"{serial}: {want}" in st.expect("serial> ")
        st.send("q")
        assert st.wait() == 0
    got = rows(out, "SELECT serial, verdict, state FROM measurements ORDER BY id")
    assert [(r["serial"], r["verdict"], r["state"]) for r in got] == [
        ("GOLDEN", "pass", "stored"), (GOOD[0], "pass", "stored"), (BAD[0], "fail", "stored")]


@pytest.mark.timeout(120)
@pytest.mark.parametrize("protocol", ["hislip", "vxi11"])
def test_soak_over_the_lan_with_every_wire_fault(sim: SimServer, tmp_path: Path,
                                                 protocol: str) -> None:
    spool = Spool(tmp_path / "spool").ensure()
    sim.faults.schedule(at=STORM)
    job = submit(spool, soak_plan(tmp_path / "p.yaml", _resource(sim, protocol),
                                  tmp_path / "out", count=60, points=51))
    result: dict[str, str] = {}
    worker = threading.Thread(target=lambda: result.__setitem__("r", SoakWorker(
        job, StopSignal()).run()))
    worker.start()
    worker.join(100)
    assert result.get("r") == "finished", job.read_state()
    states = check_invariants(job, 60)
    assert states["stored"] + states["measured"] >= 60 - 8
    kinds = {f["kind"] for f in journal_rows(job)[2]}
    assert {"connection-lost", "timeout", "bad-block", "scpi-error", "settings-lost"} <= kinds
    assert {f["endpoint"] for f in sim.faults.fired if f["event"] != "now"} <= {protocol, None}
