"""The invented personalities end to end, each driven only by its shipped dialect
(tabletop-ascii, slotted-blocks), over TCP and over a pseudo-terminal, with the same tests
the generic one passes elsewhere: calibrate with its own switch, ``sweepd run``, one
station unit (``sweepd measure``) and a short soak with faults injected at the wire."""

from __future__ import annotations

import io
import json
import threading
from pathlib import Path

import numpy as np
import pytest
import yaml
from test_calibrate_sim import _cal, _device_error, _plan
from test_soak_support import check_invariants, journal_rows, soak_plan, submit
from test_station_support import GOOD, write_plan

from acquire.calibration import CalSet
from acquire.cli import main
from acquire.guided import Options, calibrate
from acquire.library import library_dir
from acquire.plan import load_plan
from acquire.soak.spool import Spool
from acquire.soak.worker import SoakWorker, StopSignal
from acquire.touchstone import read_touchstone
from simulators.server import SimServer

DIALECTS = {"slotted": "slotted-blocks", "tabletop": "tabletop-ascii"}
IDENTITIES = {"slotted": "sweepd-sim,slotted-2port,SIM0003,0.9",
              "tabletop": "sweepd-sim,tabletop-2port,SIM0002,2.3"}
LINKS = ["tcp", "serial"]


@pytest.fixture(scope="module", params=sorted(DIALECTS))
def sim(request):
    with SimServer(personality=request.param, serial=True, time_scale=0.0,
                   noise=False) as server:
        yield server


@pytest.fixture(autouse=True)
def _fixture_back_to_the_device(sim):
    yield
    sim.bench.set_device("patch-2g45")
    sim.bench.restore()
    sim.bench.connect("device")


def resource(sim: SimServer, link: str) -> str:
    return sim.tcp_resource if link == "tcp" else sim.serial_resource


def with_dialect(path: Path, personality: str) -> Path:
    """``path`` (or the shipped plan of that name when it does not exist) on the dialect
    of ``personality``."""
    source = path if path.exists() else library_dir("plans") / path.name
    data = yaml.safe_load(source.read_text())
    data["instrument"]["dialect"] = DIALECTS[personality]
    path.write_text(yaml.safe_dump(data, sort_keys=False))
    return path


@pytest.mark.parametrize("link", LINKS)
def test_calibrate_by_its_own_switch(sim: SimServer, tmp_path: Path, link: str) -> None:
    plan_path = with_dialect(_plan(tmp_path), sim.personality)
    outcome, out = _cal(plan_path, sim, tmp_path / "out", resource=resource(sim, link),
                        prompt="switch", script=None)
    assert outcome.exit_code == 0, out
    assert f"by the analyzer's standard switch ({DIALECTS[sim.personality]})" in out
    corrected, raw = _device_error(plan_path, sim, CalSet.load(outcome.saved),
                                   resource(sim, link))
    assert corrected < 1e-3 and raw > 0.1  # as for the other personalities, noise off


@pytest.mark.parametrize("link", LINKS)
def test_run_a_two_port_plan(sim: SimServer, tmp_path: Path, link: str) -> None:
    sim.bench.set_device("cable-1m")
    path = with_dialect(tmp_path / "cable-line.yaml", sim.personality)
    data = yaml.safe_load(path.read_text())
    data["calibration"] = {"method": "none"}  # raw data, to compare with the bench's own
    data.pop("checks", None)  # raw data fail the cable mask: not what this test is about
    path.write_text(yaml.safe_dump(data, sort_keys=False))
    code = main(["run", str(path), "--resource", resource(sim, link),
                 "--output", str(tmp_path / "out"), "--serial", "C-0001"])
    assert code == 0
    (ts_path,) = (tmp_path / "out").glob("cable-line-C-0001-*.s2p")
    ts = read_touchstone(ts_path)
    stim = load_plan(path).stimulus
    np.testing.assert_allclose(ts.freq_hz, stim.frequencies(), rtol=1e-15)
    # what the bench measured (noise off), through the file's MA format: |S| and angle
    # in degrees, each written with enough digits for a 1e-9 relative round trip
    want = sim.bench.sweep(ts.freq_hz, stim.power_dbm, stim.if_bandwidth_hz, 1)
    np.testing.assert_allclose(ts.data, want, rtol=1e-6, atol=1e-9)


@pytest.mark.parametrize("link", LINKS)
def test_one_station_unit(sim: SimServer, tmp_path: Path, link: str,
                          capsys: pytest.CaptureFixture) -> None:
    plan = with_dialect(write_plan(tmp_path, resource(sim, link), station={"golden": None}),
                        sim.personality)
    sim.bench.select_unit(GOOD[0])
    # cal sets belong to one instrument identity: calibrate this one by its switch first
    outcome = calibrate(load_plan(plan), Options(prompt="switch", compare_last=False),
                        stdout=io.StringIO())
    assert outcome.saved is not None
    code = main(["measure", str(plan), "--json", "--serial", GOOD[0]])
    result = json.loads(capsys.readouterr().out)
    assert code == 0 and result["verdict"] == "pass", result["error"]
    assert result["instrument"] == IDENTITIES[sim.personality]
    assert Path(result["files"]["touchstone"]).is_file()


# sweep index -> fault, as in the generic soak storm (stalls outlast the 0.4 s timeout)
STORM = [
    [4, "drop"], [9, "stall", {"seconds": 0.6}], [14, "garbage"],
    [19, "truncate", {"then": "close"}], [24, "wrong_count"], [29, "error"],
    [34, "reboot", {"down_s": 0.2}],
]


@pytest.mark.timeout(120)
@pytest.mark.parametrize("link", LINKS)
@pytest.mark.parametrize("personality", sorted(DIALECTS))
def test_a_short_soak_through_injected_faults(tmp_path: Path, link: str,
                                              personality: str) -> None:
    planned = 45
    spool = Spool(tmp_path / "spool").ensure()
    serial = link == "serial"
    with SimServer(personality=personality, tcp_port=None if serial else 0, serial=serial,
                   time_scale=0.0, noise=True, seed=5) as storm_sim:
        storm_sim.faults.schedule(at=STORM)
        where = storm_sim.serial_resource if serial else storm_sim.tcp_resource
        plan = soak_plan(tmp_path / "soak.yaml", where, tmp_path / "out", count=planned,
                         points=51, name=f"soak-{personality}")
        job = submit(spool, with_dialect(plan, personality))
        result: list[str] = []
        worker = threading.Thread(target=lambda: result.append(SoakWorker(job, StopSignal()).run()))
        worker.start()
        worker.join(100)
        fired = len(storm_sim.faults.fired)
    assert result == ["finished"], job.read_state()
    states = check_invariants(job, planned)
    assert states["stored"] + states["measured"] >= planned - len(STORM)
    kinds = {f["kind"] for f in journal_rows(job)[2]}
    assert fired >= len(STORM) - 1
    assert {"timeout", "bad-block", "scpi-error"} <= kinds, kinds
