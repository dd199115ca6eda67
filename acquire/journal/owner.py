"""Which runs still have a live process: an OS file lock per run, held for its life.

A process that starts a run first takes an exclusive ``flock`` on its own lock file
``<folder>/.sweepd-locks/<token>.lock`` (a random token), then journals the run with that
token as its ``owner``. The kernel drops the lock when the process dies, however it dies.
A later start settles only runs whose owner is gone: the lock file is missing (the owner
removes it after ending its run) or can be locked. Runs journalled before owners existed
(``owner`` empty) have no process to ask and count as gone.
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import os
import secrets
import socket
from pathlib import Path
from typing import TYPE_CHECKING

from acquire.errors import JournalError

if TYPE_CHECKING:
    from acquire.journal.store import JournalStore

LOCK_DIR = ".sweepd-locks"
# the runs a start settles when their process is gone: soak runs are left to their job,
# which resumes them on its schedule
SETTLED_KINDS = ("run", "measure", "station")


class RunOwner:
    """This process's claim on a run it is about to start (see the module docstring)."""

    def __init__(self, folder: Path) -> None:
        self.token = secrets.token_hex(12)
        self.pid = os.getpid()
        self.host = socket.gethostname()
        self.path = lock_path(folder, self.token)
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            self._fd: int | None = os.open(self.path, os.O_RDWR | os.O_CREAT | os.O_EXCL,
                                           0o600)
            fcntl.flock(self._fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError as exc:
            raise JournalError(f"run lock {self.path}: cannot create "
                               f"({exc.strerror or exc})") from None

    def fields(self) -> dict[str, object]:
        """The run columns that name this owner."""
        return {"owner": self.token, "pid": self.pid, "host": self.host}

    def release(self) -> None:
        """After the run is ended: the lock file goes, then the lock."""
        if self._fd is None:
            return
        with contextlib.suppress(FileNotFoundError):
            self.path.unlink()
        os.close(self._fd)
        self._fd = None

    def __enter__(self) -> RunOwner:
        return self

    def __exit__(self, *exc: object) -> None:
        self.release()


def lock_path(folder: Path, token: str) -> Path:
    return Path(folder) / LOCK_DIR / f"{token}.lock"


def owner_alive(folder: Path, token: str | None) -> bool:
    """True while the process that owns a run holds its lock."""
    if not token or not all(c in "0123456789abcdef" for c in token):
        return False
    try:
        fd = os.open(lock_path(folder, token), os.O_RDWR)
    except FileNotFoundError:
        return False
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError as exc:
        if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
            return True
        raise
    finally:
        os.close(fd)
    return False


def settle_dead_runs(journal: JournalStore, folder: Path,
                     kinds: tuple[str, ...] = SETTLED_KINDS, plan: str | None = None
                     ) -> tuple[int, list[tuple[int, str]]]:
    """End the ``running`` runs of these kinds whose process is gone: their pending rows
    are reconciled, the run is marked ``crashed``; pending rows of runs that ended are
    reconciled too. Returns (runs settled, rows changed)."""
    runs, changed = 0, []
    for run in journal.open_runs(kinds, plan):
        if owner_alive(folder, run.get("owner")):
            continue
        changed += journal.reconcile(run_id=int(run["id"]))
        journal.end_run(int(run["id"]), "crashed",
                        note="ended without closing (its process was gone); settled at a "
                        "later start")
        runs += 1
        with contextlib.suppress(OSError):
            if run.get("owner"):
                lock_path(folder, str(run["owner"])).unlink()
    # a run that ended (failed on a full disk, say) with a row still pending: nobody
    # writes it any more
    for run_id in sorted({int(row["run_id"]) for row in journal.pending()}):
        run = journal.run(run_id)
        if run is not None and run["kind"] in kinds and run["state"] != "running":
            changed += journal.reconcile(run_id=run_id)
    return runs, changed
