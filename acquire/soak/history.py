"""What the journal says about one soak job: its run, every sweep, faults and alarms.

Used by the worker when it resumes, by ``sweepd status`` (counts, last verdict and fault)
and by ``sweepd report`` (the whole series). Readers open the journal without writing to
it, so they never disturb the daemon.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from acquire.journal import DONE_STATES, JournalStore, journal_in

SOAK_KIND = "soak"


def find_run(journal: JournalStore, job: Any) -> dict[str, Any] | None:
    """The journal run of ``job``, matched on its unique id. A job submitted before jobs
    had one is matched on the run its own state file names, if that run is its."""
    if job.uid:
        return journal.soak_run(job.uid)
    run_id = job.read_state().get("run_id")
    run = journal.run(int(run_id)) if run_id else None
    if run is None or run["kind"] != SOAK_KIND or run["job_id"] != job.id:
        return None
    return run


@dataclass
class Counts:
    """Sweeps by journal state for one run."""

    by_state: dict[str, int] = field(default_factory=dict)
    last_seq: int | None = None
    held: int = 0  # sweeps not taken during holds for disk space (closed holds)

    @property
    def done(self) -> int:
        return sum(self.by_state.get(s, 0) for s in DONE_STATES)

    @property
    def kept(self) -> int:
        return self.by_state.get("stored", 0)

    @property
    def missed(self) -> int:
        return self.by_state.get("missed", 0) + self.held

    @property
    def failed(self) -> int:
        return self.by_state.get("failed", 0)

    @property
    def pending(self) -> int:
        return self.by_state.get("pending", 0)

    @property
    def interrupted(self) -> int:
        return self.by_state.get("interrupted", 0)

    @property
    def next_seq(self) -> int:
        return 0 if self.last_seq is None else self.last_seq + 1

    def to_dict(self) -> dict[str, int]:
        return {"done": self.done, "kept": self.kept, "missed": self.missed,
                "failed": self.failed, "pending": self.pending,
                "interrupted": self.interrupted}


def counts(journal: JournalStore, run_id: int) -> Counts:
    """Rows by state, with the sweeps of closed holds counted as missed; the last index
    covers rows and holds alike."""
    by_state, top = journal.state_counts(run_id)
    held = 0
    for hold in journal.holds(run_id):
        first, last = int(hold["first_seq"]), hold["last_seq"]
        end = int(last) if last is not None else first - 1
        held += max(0, end - first + 1)
        if end >= first:
            top = end if top is None else max(top, end)
    return Counts(by_state, top, held)


def open_hold(journal: JournalStore, run_id: int) -> dict[str, Any] | None:
    holds = [h for h in journal.holds(run_id) if h["last_seq"] is None]
    return holds[-1] if holds else None


def last_sweep(journal: JournalStore, run_id: int) -> dict[str, Any] | None:
    rows = journal.run_measurements(run_id, DONE_STATES, limit=1, newest_first=True)
    return rows[0] if rows else None


def faults(journal: JournalStore, run_id: int, limit: int | None = None
           ) -> list[dict[str, Any]]:
    return journal.faults(run_id, last=limit)


def alarms(journal: JournalStore, run_id: int) -> list[dict[str, Any]]:
    return journal.alarms(run_id)


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


def series(journal: JournalStore, run_id: int) -> Series:
    rows = journal.run_measurements(run_id)
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


def open_for_job(output_dir: Path) -> JournalStore:
    """The job's journal, read-only: readers never disturb the daemon."""
    return journal_in(output_dir, read_only=True)


def _num(value: Any) -> float:
    return float(value) if isinstance(value, (int, float)) and not isinstance(value, bool) \
        else np.nan
