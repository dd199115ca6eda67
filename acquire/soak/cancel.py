"""Cancelling a job: a marker file the daemon obeys, or settled here when no daemon runs."""

from __future__ import annotations

import getpass
import os

from acquire.journal import JOURNAL_NAME, journal_in
from acquire.soak.spool import ACTIVE_STATES, Job, Spool
from acquire.utc import utc_text


def who() -> str:
    try:
        user = getpass.getuser()
    except (KeyError, OSError):
        user = str(os.getuid())
    return f"{user} (sweepd cancel, pid {os.getpid()})"


def cancel_without_daemon(spool: Spool, job: Job) -> bool:
    """Mark ``job`` cancelled while holding the daemon lock; False if a daemon appeared."""
    lock = spool.lock()
    if not lock.try_acquire(write_pid=False):
        return False
    try:
        state = job.read_state()
        if state.get("state") not in ACTIVE_STATES:
            return True
        reason = f"cancelled by {who()} while sweepd serve was not running"
        run_id = state.get("run_id")
        if run_id and (job.output_dir / JOURNAL_NAME).is_file():
            with journal_in(job.output_dir,
                            location=job.load_plan().output.journal) as journal:
                journal.reconcile(run_id=int(run_id))
                journal.record_fault(int(run_id), "cancel", reason, action="job stopped")
                journal.end_run(int(run_id), "stopped", note=reason)
        job.write_state(state="cancelled", reason=reason, ended_utc=utc_text())
        return True
    finally:
        lock.release()


def cancel_job(spool: Spool, job: Job, wait_s: float,
               daemon_here: bool = False) -> str:
    """Ask ``job`` to stop; wait up to ``wait_s`` for it. Returns what happened, in words.

    ``daemon_here`` says the caller is the daemon itself (the HTTP service), which stops
    the job after the sweep in flight.
    """
    import time

    from acquire.soak.spool import ACTIVE_STATES

    state = job.read_state().get("state")
    if state not in ACTIVE_STATES:
        return f"job {job.id} is already {state}"
    job.request_cancel(who())
    if not daemon_here and spool.daemon_pid() is None and cancel_without_daemon(spool, job):
        return f"job {job.id} cancelled (sweepd serve was not running)"
    deadline = time.monotonic() + max(0.0, wait_s)
    while time.monotonic() < deadline:
        state = job.read_state().get("state")
        if state not in ACTIVE_STATES:
            return f"job {job.id} {state}"
        time.sleep(0.1)
    return f"job {job.id}: cancel requested; sweepd serve stops it after the sweep in flight"
