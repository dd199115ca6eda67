"""Per-point drift of every sweep, appended to one binary file per job.

Each record is the sweep index (int64) followed by the change of |S| in dB and the change
of phase in degrees at every point (float32 each, little-endian). Records have a fixed
size, so a record cut short by a kill is recognised by the file length and cut off when
the job resumes. The journal decides which sweeps count: a record whose index the journal
does not hold as measured or stored is ignored, and of two records for one index the last
wins. The frequency grid is kept beside it (``deviation-freq.f64``).
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

FILE_NAME = "deviation.bin"
GRID_NAME = "deviation-freq.f64"


def record_dtype(points: int) -> np.dtype:
    return np.dtype([("seq", "<i8"), ("db", "<f4", (points,)), ("deg", "<f4", (points,))])


class DeviationFile:
    """Append-only writer of drift records; ``repair()`` first after a crash."""

    def __init__(self, folder: Path, freq_hz: np.ndarray) -> None:
        self.path = folder / FILE_NAME
        self.freq_hz = np.asarray(freq_hz, dtype=np.float64)
        self.dtype = record_dtype(self.freq_hz.size)
        self._fd: int | None = None
        self._record = np.zeros(1, dtype=self.dtype)
        grid = folder / GRID_NAME
        if not grid.exists():
            from acquire.storage import write_new

            write_new(grid, self.freq_hz.astype("<f8").tobytes(), unique=False)

    def repair(self) -> int:
        """Cut a partial last record; returns how many bytes were dropped."""
        if not self.path.exists():
            return 0
        size = self.path.stat().st_size
        extra = size % self.dtype.itemsize
        if extra:
            os.truncate(self.path, size - extra)
        return extra

    def append(self, seq: int, delta_db: np.ndarray, delta_deg: np.ndarray) -> None:
        if self._fd is None:
            self._fd = os.open(self.path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o600)
        rec = self._record
        rec["seq"] = seq
        rec["db"][0] = delta_db
        rec["deg"][0] = delta_deg
        os.write(self._fd, rec.tobytes())

    def sync(self) -> None:
        if self._fd is not None:
            os.fsync(self._fd)

    def close(self) -> None:
        if self._fd is not None:
            os.close(self._fd)
            self._fd = None


def read_deviation(folder: Path, keep: set[int] | None = None
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None:
    """``(freq_hz, seq, db, deg)`` with one row per journalled index, or None if absent.

    ``keep`` limits the rows to those indices (the journal's measured and stored ones).
    """
    grid_path, data_path = folder / GRID_NAME, folder / FILE_NAME
    if not grid_path.exists() or not data_path.exists():
        return None
    freq = np.fromfile(grid_path, dtype="<f8")
    dtype = record_dtype(freq.size)
    raw = data_path.read_bytes()
    whole = len(raw) - len(raw) % dtype.itemsize
    records = np.frombuffer(raw[:whole], dtype=dtype)
    seq = records["seq"]
    # The last record of each index wins: unique on the reversed order.
    _, last = np.unique(seq[::-1], return_index=True)
    rows = seq.size - 1 - last
    rows = rows[np.argsort(seq[rows], kind="stable")]
    if keep is not None:
        rows = rows[np.isin(seq[rows], np.fromiter(keep, dtype=np.int64, count=len(keep)))]
    return freq, seq[rows], records["db"][rows], records["deg"][rows]
