"""Soak workers against the simulator over real TCP and a real pseudo-terminal, with every
fault kind injected at the wire: the jobs complete, every fault is journalled, files,
journal and status agree, nothing is half-written."""

from __future__ import annotations

import threading
from pathlib import Path

import pytest
from test_soak_support import (
    check_invariants,
    holds,
    journal_rows,
    soak_plan,
    status_counts,
    submit,
)

from acquire.soak.spool import Spool
from acquire.soak.worker import SoakWorker, StopSignal
from simulators.server import SimServer

# sweep index (simulator's count, 1 = first) -> fault; stalls outlast the 0.4 s timeout
STORM = [
    [6, "drop"], [14, "stall", {"seconds": 0.6}], [22, "garbage"],
    [30, "truncate", {"then": "close"}], [38, "truncate", {"then": "stall"}],
    [46, "wrong_count"], [54, "error"], [62, "reboot", {"down_s": 0.3}],
    [90, "error", {"code": -222, "text": "data out of range"}], [120, "drop"],
    [150, "garbage", {"nbytes": 3}], [180, "reboot", {"down_s": 0.2}],
]
KINDS_SEEN = {"connection-lost", "timeout", "bad-block", "scpi-error", "settings-lost"}
INSTRUMENT_KINDS = {"connect", "timeout", "connection-lost", "bad-block", "bad-reply",
                    "scpi-error"}


@pytest.mark.timeout(120)
def test_fault_storm_over_tcp_and_serial_side_by_side(tmp_path: Path) -> None:
    spool = Spool(tmp_path / "spool").ensure()
    with SimServer(time_scale=0.0, noise=True, seed=3) as tcp_sim, \
            SimServer(tcp_port=None, serial=True, time_scale=0.0, noise=True, seed=4) as pty_sim:
        tcp_sim.bench.set_drift(rate_hz_per_s=2e4, jitter_hz=5e3)
        tcp_sim.faults.schedule(at=STORM)
        pty_sim.faults.schedule(at=[item for item in STORM if item[0] <= 100])
        jobs = [
            (submit(spool, soak_plan(tmp_path / "tcp.yaml", tcp_sim.tcp_resource,
                                     tmp_path / "out", count=240, name="soak-tcp")), 240),
            (submit(spool, soak_plan(tmp_path / "pty.yaml", pty_sim.serial_resource,
                                     tmp_path / "out", count=110, points=51,
                                     name="soak-pty")), 110),
        ]
        stop = StopSignal()
        results: dict[str, str] = {}
        threads = [threading.Thread(target=lambda j=job: results.__setitem__(
            j.id, SoakWorker(j, stop).run())) for job, _ in jobs]
        for thread in threads:
            thread.start()
        for thread in threads:
            thread.join(100)
        fired = {"soak-tcp": len(tcp_sim.faults.fired), "soak-pty": len(pty_sim.faults.fired)}
    for job, planned in jobs:
        assert results[job.id] == "finished", job.read_state()
        states = check_invariants(job, planned)
        assert states["stored"] + states["measured"] >= planned - 12
        kinds = [f["kind"] for f in journal_rows(job)[2]]
        # a pseudo-terminal never hangs up: its dropped replies are timeouts
        expected = KINDS_SEEN - ({"connection-lost"} if job.plan_name == "soak-pty" else set())
        assert expected <= set(kinds), kinds
        # every fault that fired at the wire left at least one instrument fault row
        assert sum(k in INSTRUMENT_KINDS for k in kinds) >= fired[job.plan_name] - 1, kinds
        view = status_counts(job)
        assert view["done"] == states["stored"] + states["measured"]
        assert view["missed"] == states.get("missed", 0)
        live = job.read_status()
        assert live["state"] == "finished"
        assert live["sweeps"]["done"] == view["done"]
        assert live["sweeps"]["missed"] == view["missed"]
        assert live["drift"]["latest"]["resonance_hz"] > 2.3e9


def _job(tmp_path: Path, resource: str, **options):
    spool = Spool(tmp_path / "spool").ensure()
    return submit(spool, soak_plan(tmp_path / "plan.yaml", resource, tmp_path / "out",
                                   **options))


def test_a_full_disk_holds_the_job_and_it_resumes_when_space_is_back(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    import shutil
    from collections import namedtuple

    usage = namedtuple("usage", "total used free")
    free = {"bytes": 10 * 10**6}
    monkeypatch.setattr("acquire.soak.diskhold.shutil.disk_usage",
                        lambda _path: usage(10**9, 10**9 - free["bytes"], free["bytes"]))
    del shutil
    with SimServer(time_scale=0.0) as sim:
        job = _job(tmp_path, sim.tcp_resource, every="0.05 s", count=30,
                   soak={"disk_reserve": "50 MB"})
        worker = SoakWorker(job)
        thread = threading.Thread(target=worker.run)
        thread.start()
        for _ in range(600):  # the state file says held first, then the status file
            if job.read_state().get("state") == job.read_status().get("state") == "held":
                break
            threading.Event().wait(0.05)
        status = job.read_status()
        assert status.get("state") == "held", (job.read_state(), status)
        assert job.read_state()["state"] == "held"
        assert "disk nearly full: 10.0 MB free" in job.read_state()["reason"]
        assert not list(job.data_dir.glob("*.s1p"))  # nothing captured while held
        threading.Event().wait(0.4)
        free["bytes"] = 10**9
        thread.join(30)
    assert worker.state == "finished"
    states = check_invariants(job, 30)
    assert states["held"] >= 5 and states["stored"] >= 1
    _, rows, faults = journal_rows(job)
    # one hold for the whole span, not one missed row per sweep
    (hold,) = holds(job)
    assert hold["reason"].startswith("disk nearly full: 10.0 MB free")
    assert not any("disk" in (r["note"] or "") for r in rows)
    assert [f["kind"] for f in faults if f["kind"].startswith("disk")] == ["disk-full", "disk-ok"]
    assert status["state"] == "held"
    assert status_counts(job)["missed"] == states["held"] + states.get("missed", 0)


def test_cancel_stops_cleanly_and_a_bad_plan_fails_with_one_line(tmp_path: Path) -> None:
    with SimServer(time_scale=0.0) as sim:
        job = _job(tmp_path, sim.tcp_resource, every="0.02 s", count=10_000)
        worker = SoakWorker(job)
        thread = threading.Thread(target=worker.run)
        thread.start()
        threading.Event().wait(0.6)
        job.request_cancel("test")
        thread.join(10)
    assert worker.state == "cancelled"
    assert job.read_state()["reason"] == "cancelled by test"
    runs, rows, faults = journal_rows(job)
    assert runs[0]["state"] == "stopped" and faults[-1]["kind"] == "cancel"
    check_invariants(job, len(rows))
    # an instrument that never answers and a plan that gives up after 1 s
    bad = _job(tmp_path / "b", "TCPIP::127.0.0.1::9::SOCKET", every="0.2 s", count=50,
               soak={"faults": {"backoff_first": "0.1 s", "backoff_max": "0.2 s",
                                "give_up": "1 s"}})
    worker = SoakWorker(bad)
    assert worker.run() == "failed"
    reason = bad.read_state()["reason"]
    assert "not ready for" in reason and "faults.give_up is 1 s" in reason
    assert "\n" not in reason
    check_invariants(bad, len(journal_rows(bad)[1]))


def test_a_hold_goes_on_across_a_daemon_restart_as_one_hold(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The daemon stops while the job is held and starts again with the disk still full:
    the same hold goes on (one row), the job shows held, and ends when space returns."""
    from collections import namedtuple

    usage = namedtuple("usage", "total used free")
    free = {"bytes": 10**9}
    monkeypatch.setattr("acquire.soak.diskhold.shutil.disk_usage",
                        lambda _path: usage(10**9, 10**9 - free["bytes"], free["bytes"]))
    with SimServer(time_scale=0.0) as sim:
        job = _job(tmp_path, sim.tcp_resource, every="0.05 s", count=40,
                   soak={"disk_reserve": "50 MB"})
        stop = StopSignal()
        first = threading.Thread(target=SoakWorker(job, stop).run)
        first.start()
        wait = threading.Event().wait
        for _ in range(400):  # a few sweeps first
            if (job.read_status().get("sweeps") or {}).get("done", 0) >= 3:
                break
            wait(0.02)
        free["bytes"] = 10**6  # the disk fills
        for _ in range(200):
            if job.read_state().get("state") == "held":
                break
            wait(0.02)
        stop.set("SIGTERM")
        first.join(30)
        assert [h["last_seq"] for h in holds(job)] == [None]  # still open
        second = SoakWorker(job)
        thread = threading.Thread(target=second.run)
        thread.start()
        for _ in range(200):
            if second.state == "held" and job.read_state().get("state") == "held":
                break
            wait(0.02)
        assert job.read_state()["state"] == "held"
        wait(0.3)
        free["bytes"] = 10**9  # space returns
        thread.join(30)
    assert second.state == "finished"
    (hold,) = holds(job)
    assert hold["last_seq"] >= hold["first_seq"]
    check_invariants(job, 40)
