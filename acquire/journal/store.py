"""``JournalStore``: what the rest of sweepd may ask of a journal, whatever keeps it.

Every record of runs, measurements, faults, golden checks and alarms goes through these
methods; no other module writes or reads the journal's tables. Rows come back as plain
dicts (column name -> value), so callers never see the backend. The SQLite backend
(``acquire.journal.sqlite``, one file per output folder) is the default; a shared
PostgreSQL store (``acquire.journal.postgres``) stands behind the same methods.

Write order is the contract that keeps the journal true after a crash: a capture is
journalled ``pending`` with its planned file name before any file is written, then the
files are written atomically, then the row is marked ``stored``. ``reconcile`` settles
what a killed process left (see ``acquire.journal.settle``).
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from acquire.utc import utc_text

Row = dict[str, Any]

RUN_FIELDS = ("plan_path", "station", "operator", "instrument", "resource", "job_id",
              "job_uid", "owner", "pid", "host", "note", "lot")
RUN_UPDATES = ("instrument", "resource", "state", "note", "ended_utc", "station", "operator",
               "lot")
FILL_FIELDS = ("metrics_json", "verdict", "exit_code", "worst_margin", "summary",
               "raw_touchstone", "verdict_json", "cal_id", "cal_age_s", "instrument", "note",
               "touchstone_sha256", "summary_sha256")


@dataclass(frozen=True)
class Planned:
    """A measurement journalled as pending, with the file names it will get."""

    id: int
    run_id: int
    seq: int
    serial: str
    attempt: int
    touchstone: Path
    capture_id: str = ""  # the idempotent key it was journalled under


@dataclass(frozen=True)
class StoredFields:
    """Everything journalled with a stored (or metrics-only) measurement."""

    verdict: str | None = None
    exit_code: int | None = None
    worst_margin: float | None = None
    metrics_json: str | None = None
    verdict_json: str | None = None
    cal_id: str | None = None
    cal_age_s: float | None = None
    instrument: str | None = None
    note: str | None = None


class JournalStore(ABC):
    """One journal (see the module docstring); safe to share between threads."""

    where: str  # how messages name this journal (a file path, a server address)

    # -- life cycle ------------------------------------------------------------------------
    @abstractmethod
    def close(self) -> None: ...

    def __enter__(self) -> JournalStore:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @property
    @abstractmethod
    def schema_version(self) -> int: ...

    # -- runs --------------------------------------------------------------------------------
    @abstractmethod
    def start_run(self, kind: str, plan: str, *, run_uid: str | None = None,
                  **fields: Any) -> int:
        """A new run in state ``running``; ``fields`` from ``RUN_FIELDS``. Starting it again
        with the same ``run_uid`` (a retry) returns the same run."""

    @abstractmethod
    def update_run(self, run_id: int, **fields: Any) -> None:
        """Change ``RUN_UPDATES`` fields of a run."""

    def end_run(self, run_id: int, state: str = "finished", note: str | None = None) -> None:
        fields: dict[str, Any] = {"state": state, "ended_utc": utc_text()}
        if note is not None:
            fields["note"] = note
        self.update_run(run_id, **fields)

    @abstractmethod
    def run(self, run_id: int) -> Row | None: ...

    @abstractmethod
    def soak_run(self, job_uid: str) -> Row | None:
        """The run of the soak job with this unique id, if it ever started."""

    @abstractmethod
    def open_runs(self, kinds: Sequence[str], plan: str | None = None) -> list[Row]:
        """Runs still ``running`` of these kinds (of ``plan`` if given), oldest first."""

    # -- measurements: writing ------------------------------------------------------------------
    @abstractmethod
    def next_seq(self, run_id: int) -> int: ...

    @abstractmethod
    def attempts(self, plan: str, serial: str) -> int:
        """How many measurements of ``serial`` under ``plan`` were stored before."""

    @abstractmethod
    def plan_measurement(self, run_id: int, seq: int, touchstone: Path, *, serial: str = "",
                         golden: bool = False, attempt: int | None = None,
                         capture_id: str | None = None) -> Planned:
        """Journal a measurement as pending before its files are written. Planning it
        again under the same ``capture_id`` (a retry) returns the row already there."""

    @abstractmethod
    def store_measurement(self, planned: Planned, *, touchstone: Path, summary: Path | None,
                          raw_touchstone: Path | None, fields: StoredFields) -> None:
        """Mark a planned measurement stored, with everything known about it."""

    @abstractmethod
    def record_measured(self, run_id: int, seq: int, fields: StoredFields) -> None:
        """A sweep taken and judged whose data are not kept as a file."""

    @abstractmethod
    def record_missed(self, run_id: int, seqs: Iterable[int], reason: str, *,
                      serial: str = "") -> int:
        """Sweeps due but not taken; an index already journalled keeps its row.
        Returns how many rows were added."""

    @abstractmethod
    def fail_measurement(self, planned: Planned, reason: str) -> None:
        """A pending measurement whose files could not be written."""

    @abstractmethod
    def fill_measurement(self, measurement_id: int, **fields: Any) -> None:
        """Complete a stored row (adopted after a restart) with ``FILL_FIELDS``."""

    def reconcile(self, *, adopt: bool = True, run_id: int | None = None
                  ) -> list[tuple[int, str]]:
        """Settle pending rows left by a crash (``acquire.journal.settle.reconcile``)."""
        from acquire.journal.settle import reconcile

        return reconcile(self, adopt=adopt, run_id=run_id)

    @abstractmethod
    def pending(self, run_id: int | None = None) -> list[Row]:
        """Pending rows (``id``, ``run_id``, ``touchstone``), of one run or all."""

    @abstractmethod
    def settle(self, measurement_id: int, state: str, fields: Mapping[str, Any]) -> None:
        """Move a pending row to ``stored`` or ``interrupted`` (used by ``reconcile``)."""

    # -- measurements: reading -------------------------------------------------------------------
    @abstractmethod
    def state_counts(self, run_id: int) -> tuple[dict[str, int], int | None]:
        """Rows of a run by state, and its highest sweep index (None when empty)."""

    @abstractmethod
    def run_measurements(self, run_id: int, states: Sequence[str] | None = None,
                         *, limit: int | None = None, newest_first: bool = False
                         ) -> list[Row]:
        """Rows of one run by sweep index (all columns), optionally of some states."""

    @abstractmethod
    def measurements(self, *, since_utc: str | None = None, plan: str | None = None,
                     station: str | None = None, lot: str | None = None) -> list[Row]:
        """Every row (all states) with its run's plan, station, operator and lot, oldest
        first; of one station or lot when given."""

    @abstractmethod
    def units_since(self, plan: str, since_utc: str) -> int:
        """Stored measurements of real units (not golden) of ``plan`` since a time."""

    # -- golden checks, faults, alarms ------------------------------------------------------------
    @abstractmethod
    def record_golden(self, run_id: int, serial: str, passed: bool, *,
                      worst_db: float | None = None, worst_deg: float | None = None,
                      touchstone: Path | None = None, message: str = "") -> None: ...

    @abstractmethod
    def last_golden(self, plan: str) -> Row | None:
        """The latest golden check of ``plan`` (``time_utc``, ``passed``, ``message``)."""

    @abstractmethod
    def last_good_golden_utc(self, plan: str) -> str | None: ...

    @abstractmethod
    def golden_checks(self, *, since_utc: str | None = None, plan: str | None = None
                      ) -> list[Row]:
        """Golden checks (``plan``, ``passed``, ``time_utc``), oldest first."""

    @abstractmethod
    def record_fault(self, run_id: int | None, kind: str, message: str, *,
                     action: str | None = None, seq: int | None = None) -> None: ...

    @abstractmethod
    def faults(self, run_id: int, last: int | None = None) -> list[Row]:
        """Faults of a run (``seq, time_utc, kind, message, action``), oldest first;
        only the ``last`` ones when given."""

    @abstractmethod
    def start_hold(self, run_id: int, first_seq: int, reason: str) -> int:
        """A soak stops taking sweeps from ``first_seq`` on (disk space): one row."""

    @abstractmethod
    def end_hold(self, hold_id: int, last_seq: int) -> None:
        """The hold ends; sweeps ``first_seq .. last_seq`` were not taken (none when
        ``last_seq < first_seq``)."""

    @abstractmethod
    def holds(self, run_id: int) -> list[Row]:
        """Holds of a run (``id, first_seq, last_seq, started_utc, ended_utc, reason``;
        ``last_seq`` None while open), oldest first."""

    @abstractmethod
    def record_alarm(self, run_id: int, metric: str, message: str, *, seq: int | None = None,
                     value: float | None = None, threshold: float | None = None) -> None: ...

    @abstractmethod
    def alarms(self, run_id: int) -> list[Row]: ...
