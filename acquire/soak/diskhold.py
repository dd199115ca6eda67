"""Free disk space for a soak job: when to pause capturing, and the one journalled hold.

A job pauses before its data folder falls below ``soak.disk_reserve``, or after a write
failed for want of space (then until ``FREED_BYTES`` more are free). While paused the
journal holds one open hold (``start_hold``/``end_hold``), never a row per sweep.
"""

from __future__ import annotations

import shutil
from dataclasses import dataclass
from pathlib import Path

from acquire.errors import JournalError
from acquire.journal import JournalStore

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
