"""One station per output folder: an exclusive ``flock`` on ``<folder>/.sweepd-station.lock``
held for the life of the station process (the kernel drops it when the process dies, so a
killed station never blocks the next one). The holder writes who it is into the file; a
second station reads that and refuses with one line naming it."""

from __future__ import annotations

import errno
import fcntl
import json
import os
import socket
from pathlib import Path

from acquire.journal import utc_text
from acquire.station.errors import StationError

LOCK_NAME = ".sweepd-station.lock"


class StationLock:
    """Held while a station works on ``folder``; ``acquire`` raises when another holds it."""

    def __init__(self, folder: Path) -> None:
        self.folder = Path(folder)
        self.path = self.folder / LOCK_NAME
        self._fd: int | None = None

    def acquire(self, station_id: str = "") -> StationLock:
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
            fd = os.open(self.path, os.O_RDWR | os.O_CREAT | os.O_NOFOLLOW, 0o600)
        except OSError as exc:
            raise StationError(f"station lock {self.path}: cannot open "
                               f"({exc.strerror or exc})") from None
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError as exc:
            os.close(fd)
            if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
                raise StationError(self._held_message()) from None
            raise StationError(f"station lock {self.path}: {exc.strerror or exc}") from None
        self._fd = fd
        holder = {"pid": os.getpid(), "host": socket.gethostname(), "since": utc_text(),
                  "station": station_id}
        os.ftruncate(fd, 0)
        os.pwrite(fd, (json.dumps(holder) + "\n").encode(), 0)
        os.fsync(fd)
        return self

    def _held_message(self) -> str:
        try:
            holder = json.loads(self.path.read_text(encoding="utf-8")[:4096])
        except (OSError, ValueError):
            holder = {}
        if not isinstance(holder, dict):
            holder = {}
        station = f"station {holder['station']}, " if holder.get("station") else ""
        who = (f"{station}pid {holder.get('pid', '?')} on {holder.get('host', '?')} since "
               f"{holder.get('since', '?')}")
        return (f"output folder {self.folder}: another station is running there ({who}); "
                "one station per folder: end that shift, or give this one --output "
                "elsewhere")

    def release(self) -> None:
        if self._fd is not None:
            os.close(self._fd)  # closing drops the lock; the file stays for the next one
            self._fd = None

    def __enter__(self) -> StationLock:
        return self

    def __exit__(self, *exc: object) -> None:
        self.release()
