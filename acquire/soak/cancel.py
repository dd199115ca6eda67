"""Cancelling a job: a marker file the daemon obeys, or settled here when no daemon runs."""

from __future__ import annotations

import getpass
import os

from acquire.journal import Journal
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
        if run_id and (job.output_dir / "journal.sqlite").is_file():
            with Journal.in_folder(job.output_dir) as journal:
                journal.reconcile(run_id=int(run_id))
                journal.record_fault(int(run_id), "cancel", reason, action="job stopped")
                journal.end_run(int(run_id), "stopped", note=reason)
        job.write_state(state="cancelled", reason=reason, ended_utc=utc_text())
        return True
    finally:
        lock.release()
