"""A soak job's identity: a unique, time-ordered id stored with its run. Resume matches on
it, never on the short per-spool job name, so a new spool writing into the same output
folder starts a job of its own."""

from __future__ import annotations

import uuid
from pathlib import Path

from test_soak_support import check_invariants, journal_rows, soak_plan, submit

from acquire.journal import journal_in
from acquire.soak.spool import Spool, new_job_uid
from acquire.soak.worker import SoakWorker
from simulators.server import SimServer


def test_job_uids_are_unique_time_ordered_version_7_uuids() -> None:
    uids = [new_job_uid() for _ in range(2000)]
    assert len(set(uids)) == len(uids)
    parsed = [uuid.UUID(u) for u in uids]
    assert {(u.version, u.variant) for u in parsed} == {(7, uuid.RFC_4122)}
    stamps = [u.int >> 80 for u in parsed]  # RFC 9562: 48-bit Unix time in ms first
    assert stamps == sorted(stamps)


def test_a_new_spool_with_the_same_output_folder_does_not_adopt_the_old_job(
        tmp_path: Path) -> None:
    out = tmp_path / "out"
    with SimServer(time_scale=0.0) as sim:
        plan = soak_plan(tmp_path / "plan.yaml", sim.tcp_resource, out, count=6)
        old = submit(Spool(tmp_path / "spool-a").ensure(), plan)
        assert SoakWorker(old).run() == "finished"
        new = submit(Spool(tmp_path / "spool-b").ensure(), plan)
        assert new.id == old.id  # the short name comes back with a new spool ...
        assert new.uid != old.uid  # ... the identity does not
        assert new.data_dir != old.data_dir  # nor does its data folder
        assert SoakWorker(new).run() == "finished"
    old_runs, old_rows, _ = journal_rows(old)
    new_runs, new_rows, new_faults = journal_rows(new)
    assert old_runs[0]["id"] != new_runs[0]["id"]
    assert (old_runs[0]["job_uid"], new_runs[0]["job_uid"]) == (old.uid, new.uid)
    assert len(old_rows) == len(new_rows) == 6  # the new job measured its own sweeps
    assert not [f for f in new_faults if f["kind"] == "restart"]  # nothing was "resumed"
    check_invariants(old, 6)
    check_invariants(new, 6)


def test_a_cancelled_old_run_is_not_rewritten_by_a_new_job(tmp_path: Path) -> None:
    out = tmp_path / "out"
    with SimServer(time_scale=0.0) as sim:
        plan = soak_plan(tmp_path / "plan.yaml", sim.tcp_resource, out, count=5)
        old = submit(Spool(tmp_path / "spool-a").ensure(), plan)
        old.request_cancel("test")
        assert SoakWorker(old).run() == "cancelled"
        new = submit(Spool(tmp_path / "spool-b").ensure(), plan)
        assert SoakWorker(new).run() == "finished"
    with journal_in(out) as journal:
        assert journal.soak_run(old.uid)["state"] == "stopped"
        assert journal.soak_run(new.uid)["state"] == "finished"
