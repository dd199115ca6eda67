"""The journal rows of one soak run: one per sweep index, kept, measured, missed or failed.

A kept sweep is journalled ``pending`` first, written atomically, then marked ``stored``;
a sweep whose file is complete but whose summary could not be written is still stored;
one that could not be written is ``failed`` and, when the disk is full, pauses the job
(through its ``DiskGuard``). The rows' counts are kept in ``tally`` as they are written.
"""

from __future__ import annotations

import contextlib
import errno
import logging
from collections.abc import Callable
from pathlib import Path

from acquire.capture.files import Stored, plan_path, store
from acquire.capture.judge import Capture
from acquire.capture.records import journal_stored, stored_fields
from acquire.errors import JournalError
from acquire.journal import JournalStore
from acquire.plan import Plan
from acquire.soak.diskhold import DiskGuard, disk_full
from acquire.soak.spec import KeepRule
from drivers.errors import SweepdError

log = logging.getLogger(__name__)

FaultHook = Callable[[BaseException, "int | None", str], None]


def keep_reasons(keep: KeepRule, k: int, cap: Capture, over: set[str],
                 first: bool) -> list[str]:
    """Why sweep ``k`` is kept as files (empty: journalled as measured only)."""
    reasons = []
    if first:
        reasons.append("reference")
    if k % keep.every == 0:
        reasons.append("every sweep" if keep.every == 1 else f"every {keep.every}th")
    verdict = cap.verdict
    if keep.failing and verdict.results and verdict.verdict != "pass":
        reasons.append(verdict.verdict)
    if keep.over_threshold and over:
        reasons.append("over " + ", ".join(sorted(over)))
    return reasons


class SweepRows:
    """Writes a run's per-sweep rows and counts them by state."""

    def __init__(self, journal: JournalStore, run_id: int, plan: Plan, data_dir: Path,
                 job_id: str, tally: dict[str, int], disk: DiskGuard,
                 on_fault: FaultHook) -> None:
        self.journal = journal
        self.run_id = run_id
        self.plan = plan
        self.data_dir = data_dir
        self.job_id = job_id
        self.tally = tally
        self.disk = disk
        self.on_fault = on_fault

    def count(self, state: str, n: int = 1) -> None:
        self.tally[state] = self.tally.get(state, 0) + n

    def measured(self, k: int, cap: Capture) -> None:
        """Journal sweep ``k``'s metrics without keeping its data."""
        verdict = cap.verdict
        self.journal.record_measured(self.run_id, k, stored_fields(
            cap, note=verdict.summary_line() if verdict.results else None,
            with_verdict_json=False))
        self.count("measured")

    def store(self, k: int, cap: Capture) -> bool:
        """Keep sweep ``k`` as files: pending row, atomic write, stored; False if failed."""
        journal = self.journal
        planned = journal.plan_measurement(self.run_id, k,
                                           plan_path(cap, self.plan, self.data_dir, index=k))
        try:
            stored = store(cap, self.plan, planned.touchstone)
        except (SweepdError, OSError) as exc:
            if planned.touchstone.is_file():  # the data file is complete; its summary is not
                journal_stored(journal, planned, cap, Stored(planned.touchstone, None))
                self.count("stored")
                self.on_fault(exc, k, "Touchstone kept, summary not written")
                return True
            with contextlib.suppress(JournalError):  # a full disk may refuse this too
                journal.fail_measurement(planned, f"not written: {exc}")
            self.count("failed")
            if (isinstance(exc, OSError) and exc.errno == errno.ENOSPC) or disk_full(exc):
                self.disk.mark_full()
            self.on_fault(exc, k, f"sweep {k} not written (state failed); checking disk space")
            return False
        journal_stored(journal, planned, cap, stored)
        self.count("stored")
        return True

    def missed(self, lo: int, hi: int, reason: str) -> None:
        """Journal sweeps ``lo .. hi-1`` as missed, in one transaction."""
        if hi <= lo:
            return
        added = self.journal.record_missed(self.run_id, range(lo, hi), reason)
        self.count("missed", added)
        span = f"sweep {lo}" if hi == lo + 1 else f"sweeps {lo}..{hi - 1}"
        log.warning("job %s: %s missed: %s", self.job_id, span, reason)
