"""How a soak job ends: the daemon's stop request, giving up, and the last records.

A job ends ``finished`` (its schedule is done), ``cancelled`` (``sweepd cancel``),
``failed`` (an error it cannot go on from), or pauses when ``sweepd serve`` stops (state
``running``: it resumes on its schedule). Each end is journalled, written to the job's
state file and shown in its status file.
"""

from __future__ import annotations

import logging
import threading
from typing import TYPE_CHECKING

from acquire.soak.link import fault_kind
from acquire.soak.spool import Job, read_json
from acquire.soak.status_writer import tally_text
from acquire.utc import utc_text
from drivers.errors import SweepdError

if TYPE_CHECKING:
    from acquire.soak.worker import SoakWorker

log = logging.getLogger(__name__)


class GiveUp(SweepdError):
    """The instrument stayed unreachable for longer than the plan's ``faults.give_up``."""


class StopSignal:
    """The daemon's request to stop every job, with its cause (e.g. ``SIGTERM``)."""

    def __init__(self) -> None:
        self.event = threading.Event()
        self.cause = ""

    def set(self, cause: str) -> None:
        self.cause = self.cause or cause
        self.event.set()

    def is_set(self) -> bool:
        return self.event.is_set()

    def wait(self, seconds: float) -> bool:
        return self.event.wait(seconds)


def finish_job(worker: SoakWorker, outcome: str) -> None:
    """Close the run for ``outcome`` (finished, cancelled or stopped)."""
    journal = worker.journal
    assert journal is not None
    worker.update_allan(max(0, worker.next_index - 1), force=True)
    if worker.hold is not None and outcome != "stopped":
        worker.hold.close_in(journal, worker.run_id, worker.next_index - 1)
        worker.hold = None
    job, run_id = worker.job, worker.run_id
    if outcome == "finished":
        journal.end_run(run_id, "finished")
        worker.state, worker.reason = "finished", None
        job.write_state(state="finished", ended_utc=utc_text(), reason=None)
        log.info("job %s: finished (%s)", job.id, tally_text(worker.tally))
    elif outcome == "cancelled":
        who = cancelled_by(job)
        worker.journal_fault("cancel", f"cancelled by {who}",
                             f"job stopped cleanly before sweep {worker.next_index}")
        journal.end_run(run_id, "stopped", note=f"cancelled by {who}")
        worker.state, worker.reason = "cancelled", f"cancelled by {who}"
        job.write_state(state="cancelled", ended_utc=utc_text(), reason=worker.reason)
        log.info("job %s: cancelled (%s)", job.id, tally_text(worker.tally))
    else:
        cause = worker.stop.cause or "a stop request"
        worker.journal_fault("stop", f"sweepd serve stopped ({cause})",
                             "no sweep left in flight; the job resumes on its schedule "
                             "when sweepd serve starts again")
        journal.update_run(run_id, note=f"paused at sweep {worker.next_index}: "
                           f"sweepd serve stopped ({cause})")
        worker.state, worker.reason = "running", f"paused: sweepd serve stopped ({cause})"
    worker.write_status(force=True)


def fail_job(worker: SoakWorker, exc: SweepdError) -> None:
    """Journal the failure, end the run and show the job failed."""
    message = str(exc)
    job = worker.job
    log.error("job %s: failed: %s", job.id, message)
    if worker.journal is not None and worker.run_id:
        worker.journal_fault(fault_kind(exc), message, "job failed")
        worker.journal.end_run(worker.run_id, "failed", note=message)
    worker.state, worker.reason = "failed", message
    job.write_state(state="failed", ended_utc=utc_text(), reason=message)
    if worker.prepared:
        worker.write_status(force=True)
    else:
        job.write_status({"job": job.id, "state": "failed", "reason": message,
                          "updated_utc": utc_text()})


def cancelled_by(job: Job) -> str:
    """Who asked to cancel ``job`` (from its cancel request file)."""
    try:
        info = read_json(job.cancel_path, {})
    except SweepdError:
        info = {}
    return str(info.get("by") or "sweepd cancel")
