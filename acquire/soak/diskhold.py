"""Free disk space for a soak job: when to pause capturing, and the one journalled hold.

A job pauses before its data folder falls below ``soak.disk_reserve``, or after a write
failed for want of space (then until ``FREED_BYTES`` more are free). While paused the
journal holds one open hold (``start_hold``/``end_hold``), never a row per sweep.
"""

from __future__ import annotations

import shutil
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

from acquire.errors import JournalError
from acquire.journal import JournalStore

if TYPE_CHECKING:
    from acquire.soak.worker import SoakWorker

FREED_BYTES = 1 << 20  # after a failed write, this much more free space ends the hold


def disk_full(exc: BaseException) -> bool:
    """A journal or storage error that says the disk is full."""
    text = str(exc).lower()
    return "disk is full" in text or "no space left" in text


class DiskGuard:
    """Says why capturing must pause for disk space, or None when there is room."""

    def __init__(self, data_dir: Path, reserve_bytes: float) -> None:
        self.data_dir = data_dir
        self.reserve = reserve_bytes
        self.full_at: int | None = None  # free bytes when a write last found the disk full

    def low(self) -> str | None:
        """The reason to pause, or None."""
        try:
            free = shutil.disk_usage(self.data_dir).free
        except OSError as exc:
            return f"cannot check free space in {self.data_dir}: {exc.strerror}"
        if free < self.reserve:
            return (f"disk nearly full: {free / 1e6:.1f} MB free in {self.data_dir}, "
                    f"soak.disk_reserve is {self.reserve / 1e6:.1f} MB")
        if self.full_at is not None:  # a write found the disk full below the reserve
            if free <= self.full_at + FREED_BYTES:
                return (f"disk full: a write failed with {free / 1e6:.2f} MB free in "
                        f"{self.data_dir}")
            self.full_at = None
        return None

    def mark_full(self) -> None:
        """A write failed for want of space: pause until more is free than now."""
        self.full_at = self.free_bytes() or 0

    def free_bytes(self) -> int | None:
        try:
            return shutil.disk_usage(self.data_dir).free
        except OSError:
            return None


@dataclass
class Hold:
    """One open hold of a run: its journal id (-1 until journalled), first sweep, reason."""

    first_seq: int
    reason: str
    id: int = -1

    def open_in(self, journal: JournalStore, run_id: int) -> None:
        """Journal the hold; when even that finds the disk full, it is journalled later."""
        try:
            self.id = journal.start_hold(run_id, self.first_seq, self.reason)
        except JournalError as exc:
            if not disk_full(exc):
                raise

    def close_in(self, journal: JournalStore, run_id: int, last_seq: int) -> None:
        """End the hold at ``last_seq`` (journalling its start first if it never was)."""
        if self.id < 0:
            self.id = journal.start_hold(run_id, self.first_seq, self.reason)
        journal.end_hold(self.id, last_seq)


def pause_for_disk(worker: SoakWorker, why: str) -> None:
    """Stop taking sweeps until space returns: one hold journalled, no row per sweep."""
    worker.state, worker.reason = "held", why
    worker.job.write_state(state="held", reason=why)
    worker.journal_fault("disk-full", why, "capturing paused before any data is damaged; "
                         "resumes by itself when space is freed", worker.next_index)
    assert worker.journal is not None
    worker.hold = Hold(worker.next_index, why)
    worker.hold.open_in(worker.journal, worker.run_id)  # no room: journalled when space returns


def resume_after_disk(worker: SoakWorker) -> None:
    """Space is back: close the hold and go on capturing."""
    assert worker.journal is not None and worker.hold is not None
    first, last = worker.hold.first_seq, worker.next_index - 1
    worker.hold.close_in(worker.journal, worker.run_id, last)
    worker.hold = None
    worker.state, worker.reason = "running", None
    worker.job.write_state(state="running", reason=None)
    skipped = max(0, last - first + 1)
    worker.journal_fault("disk-ok", f"free disk space is back; {skipped} sweep(s) not "
                         "taken while held", "capturing resumed", worker.next_index)
