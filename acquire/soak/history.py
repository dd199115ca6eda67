"""What the journal says about one soak job: its run, every sweep, faults and alarms.

Used by the worker when it resumes, by ``sweepd status`` (counts, last verdict and fault)
and by ``sweepd report`` (the whole series). Readers open the journal without writing to
it, so they never disturb the daemon.
"""

from __future__ import annotations

import json
import sqlite3
from collections.abc import Callable, Sequence
from contextlib import closing
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from acquire.errors import JournalError
from acquire.journal import JOURNAL_NAME

Query = Callable[[str, Sequence[Any]], list[Any]]
DONE_STATES = ("stored", "measured")
SOAK_KIND = "soak"


def read_only_query(journal_path: Path) -> tuple[Query, Callable[[], None]]:
    """A query function on the journal that never writes, and its closer."""
    if not journal_path.is_file():
        raise JournalError(f"journal {journal_path}: not found")
    try:
        db = sqlite3.connect(f"file:{journal_path}?mode=ro", uri=True, timeout=10.0)
    except sqlite3.Error as exc:
        raise JournalError(f"journal {journal_path}: {exc}") from None
    db.row_factory = sqlite3.Row

    def query(sql: str, params: Sequence[Any] = ()) -> list[Any]:
        try:
            return db.execute(sql, tuple(params)).fetchall()
        except sqlite3.Error as exc:
            raise JournalError(f"journal {journal_path}: {exc}") from None

    return query, db.close


def find_run(query: Query, job_id: str) -> dict[str, Any] | None:
    rows = query("SELECT * FROM runs WHERE job_id = ? AND kind = ? ORDER BY id LIMIT 1",
                 (job_id, SOAK_KIND))
    return dict(rows[0]) if rows else None


@dataclass
class Counts:
    """Sweeps by journal state for one run."""

    by_state: dict[str, int] = field(default_factory=dict)
    last_seq: int | None = None

    @property
    def done(self) -> int:
        return sum(self.by_state.get(s, 0) for s in DONE_STATES)

    @property
    def kept(self) -> int:
        return self.by_state.get("stored", 0)

    @property
    def missed(self) -> int:
        return self.by_state.get("missed", 0)

    @property
    def failed(self) -> int:
        return self.by_state.get("failed", 0)

    @property
    def pending(self) -> int:
        return self.by_state.get("pending", 0)

    @property
    def next_seq(self) -> int:
        return 0 if self.last_seq is None else self.last_seq + 1

    def to_dict(self) -> dict[str, int]:
        return {"done": self.done, "kept": self.kept, "missed": self.missed,
                "failed": self.failed, "pending": self.pending}


def counts(query: Query, run_id: int) -> Counts:
    rows = query("SELECT state, COUNT(*) AS n, MAX(seq) AS top FROM measurements "
                 "WHERE run_id = ? GROUP BY state", (run_id,))
    by_state = {row["state"]: int(row["n"]) for row in rows}
    tops = [int(row["top"]) for row in rows if row["top"] is not None]
    return Counts(by_state, max(tops) if tops else None)


def last_sweep(query: Query, run_id: int) -> dict[str, Any] | None:
    rows = query("SELECT seq, time_utc, verdict, state, touchstone FROM measurements "
                 "WHERE run_id = ? AND state IN ('stored', 'measured') "
                 "ORDER BY seq DESC LIMIT 1", (run_id,))
    return dict(rows[0]) if rows else None


def faults(query: Query, run_id: int, limit: int | None = None) -> list[dict[str, Any]]:
    sql = "SELECT seq, time_utc, kind, message, action FROM faults WHERE run_id = ? ORDER BY id"
    if limit is not None:
        sql = ("SELECT * FROM (SELECT seq, time_utc, kind, message, action, id FROM faults "
               f"WHERE run_id = ? ORDER BY id DESC LIMIT {int(limit)}) ORDER BY id")
    return [dict(row) for row in query(sql, (run_id,))]


def alarms(query: Query, run_id: int) -> list[dict[str, Any]]:
    return [dict(row) for row in query(
        "SELECT seq, time_utc, metric, value, threshold, message FROM alarms "
        "WHERE run_id = ? ORDER BY id", (run_id,))]


@dataclass
class Series:
    """Every journalled sweep index of a run, in order, with its soak metrics."""

    seq: np.ndarray  # int64
    state: list[str]
    t_s: np.ndarray  # seconds since the job's start (nan when unknown)
    verdict: list[str | None]
    touchstone: list[str | None]
    note: list[str | None]
    soak: list[dict[str, Any] | None]
    cal_id: list[str | None] = field(default_factory=list)
    cal_age_s: list[float | None] = field(default_factory=list)
    instrument: list[str | None] = field(default_factory=list)

    def values(self, key: str) -> np.ndarray:
        """One soak metric per sweep (nan where absent)."""
        return np.array([_num(m.get(key)) if m else np.nan for m in self.soak], dtype=float)

    def done_mask(self) -> np.ndarray:
        return np.array([s in DONE_STATES for s in self.state], dtype=bool)


def series(query: Query, run_id: int) -> Series:
    rows = query("SELECT seq, state, verdict, touchstone, note, metrics_json, cal_id, "
                 "cal_age_s, instrument FROM measurements WHERE run_id = ? ORDER BY seq",
                 (run_id,))
    soak, t_s = [], []
    for row in rows:
        metrics = json.loads(row["metrics_json"]) if row["metrics_json"] else None
        entry = metrics.get("soak") if isinstance(metrics, dict) else None
        soak.append(entry)
        t_s.append(_num(entry.get("t_s")) if entry else np.nan)
    return Series(
        seq=np.array([row["seq"] for row in rows], dtype=np.int64),
        state=[row["state"] for row in rows],
        t_s=np.array(t_s, dtype=float),
        verdict=[row["verdict"] for row in rows],
        touchstone=[row["touchstone"] for row in rows],
        note=[row["note"] for row in rows],
        soak=soak,
        cal_id=[row["cal_id"] for row in rows],
        cal_age_s=[row["cal_age_s"] for row in rows],
        instrument=[row["instrument"] for row in rows],
    )


def open_for_job(output_dir: Path) -> tuple[Query, Callable[[], None]]:
    return read_only_query(output_dir / JOURNAL_NAME)


def with_journal(output_dir: Path, action: Callable[[Query], Any]) -> Any:
    """Run ``action(query)`` on a read-only view of the job's journal."""
    query, close = open_for_job(output_dir)
    with closing(_Closer(close)):
        return action(query)


class _Closer:
    def __init__(self, close: Callable[[], None]) -> None:
        self.close = close


def _num(value: Any) -> float:
    return float(value) if isinstance(value, (int, float)) and not isinstance(value, bool) \
        else np.nan
