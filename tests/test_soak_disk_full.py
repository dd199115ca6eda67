"""A soak on a disk that fills up, on a real 2 MiB tmpfs holding its data and journal:
the job holds (one hold journalled, not one row per missed sweep, so the journal does not
grow while the disk is full), and resumes by itself when space returns; every index is
accounted for once, files and journal agree."""

from __future__ import annotations

import threading
import time
from pathlib import Path

import numpy as np
import pytest
from disk_support import leave_free, small_disk
from test_soak_support import check_invariants, holds, journal_rows, soak_plan, submit

from acquire.soak.report import _held_spans
from acquire.soak.spool import Spool
from acquire.soak.worker import SoakWorker
from simulators.server import SimServer


@pytest.fixture
def disk(tmp_path):
    with small_disk(tmp_path / "disk") as folder:
        yield folder


def wait_for(predicate, seconds: float, what: str) -> None:
    deadline = time.monotonic() + seconds
    while not predicate():
        assert time.monotonic() < deadline, f"timed out waiting for {what}"
        time.sleep(0.02)


def soak_until_held(tmp_path: Path, disk: Path, free: int, reserve: str, count: int):
    """Start a job whose output is on ``disk``, fill the disk to ``free`` bytes once the
    job has kept its first sweeps, and wait until it holds."""
    sim = SimServer(time_scale=0.0).__enter__()
    job = submit(Spool(tmp_path / "spool").ensure(),
                 soak_plan(tmp_path / "plan.yaml", sim.tcp_resource, disk / "out",
                           every="0.05 s", count=count, points=101,
                           soak={"disk_reserve": reserve, "keep": {"every": 4}}))
    worker = SoakWorker(job)
    thread = threading.Thread(target=worker.run)
    thread.start()
    wait_for(lambda: len(list(job.data_dir.glob("*.s1p"))) >= 3, 20, "the first sweeps")
    filler = leave_free(disk, free)
    wait_for(lambda: job.read_state().get("state") == "held", 20, "the hold")
    return sim, job, worker, thread, filler


@pytest.mark.parametrize(("free", "reserve", "why"), [
    (300_000, "600 kB", "disk nearly full"),  # below the reserve: held before any failure
    (15_000, "0 B", "disk full: a write failed"),  # no reserve: a write fails, then held
])
def test_a_held_soak_journals_one_hold_and_resumes_when_space_returns(
        tmp_path, disk, free, reserve, why) -> None:
    sim, job, worker, thread, filler = soak_until_held(tmp_path, disk, free, reserve, 60)
    try:
        assert job.read_state()["reason"].startswith(why)
        time.sleep(0.5)  # ~10 sweeps are due while held: none gets a row of its own
        during = journal_rows(job)[1]
        filler.unlink()  # space returns
        thread.join(60)
    finally:
        sim.__exit__(None, None, None)
    assert worker.state == "finished", job.read_state()
    check_invariants(job, 60)
    # the held period is one row; on a 2 MiB disk the journal's own WAL may later bring a
    # second, short hold of its own (one row again), never a row per sweep
    spans = [h for h in holds(job) if h["last_seq"] >= h["first_seq"]]
    assert 1 <= len(spans) <= 2, [dict(h) for h in holds(job)]
    hold = spans[0]
    assert hold["last_seq"] - hold["first_seq"] + 1 >= 5 and hold["reason"].startswith(why)
    assert not any("disk" in (r["note"] or "") for r in journal_rows(job)[1]
                   if r["state"] == "missed")
    assert max(r["seq"] for r in during) < hold["first_seq"] + 1
    kinds = [f["kind"] for f in journal_rows(job)[2]]
    assert kinds.count("disk-full") == len(holds(job)) and kinds.count("disk-ok") >= 1
    after = [r for r in journal_rows(job)[1] if r["seq"] > hold["last_seq"]]
    assert sum(r["state"] == "stored" for r in after) >= 3  # it captured again after it
    # the report's drift picture hatches each hold where it happened on the time axis
    drawn = _held_spans([dict(h) for h in holds(job)],
                        float(job.read_state()["start_epoch"]), np.array([0.0]))
    assert len(drawn) == len(holds(job)) and all(0 <= a < b for a, b in drawn), drawn
