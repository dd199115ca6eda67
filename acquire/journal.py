"""The journal: an SQLite database (WAL) of runs, measurements, faults, golden checks and
alarms, kept in the output folder. It is written *before* anything is reported, and it
is the record that survives crashes: a measurement is first journalled as ``pending``
with the file names it will get, then the files are written atomically, then the row is
marked ``stored``. ``reconcile`` settles rows left ``pending`` by a crash: adopted when
their file exists (writes are atomic, so it is complete), otherwise marked ``missed``.

Schema (version ``SCHEMA_VERSION``; ``MIGRATIONS`` upgrades older files in place):

- ``runs``: one per `sweepd run`/`measure` call, station shift or soak job run:
  kind, plan, plan path, station id, operator, instrument identity, resource, job id,
  started/ended (UTC ISO 8601), state (running, finished, stopped, crashed, failed).
- ``measurements``: run, seq (sweep index within the run, unique per run), serial,
  attempt (1 = first test of this serial in this plan, 2+ = retests), golden flag,
  planned/stored Touchstone path, raw path, summary path, verdict, exit code, worst
  margin, metrics and verdict JSON, cal id and age, instrument, time, state
  (pending, stored, missed, failed, measured), note. ``measured`` is a sweep whose
  metrics are journalled but whose data the plan chose not to keep as a file (soak
  jobs keep every Nth sweep); it has no Touchstone path.
- ``faults``: run, seq (if a sweep was in flight), time, kind, message, action taken.
- ``golden_checks``: run, time, serial, passed, worst deviation dB/deg, file, message.
- ``alarms``: run, seq, time, metric, value, threshold, message.
- ``meta``: key/value (schema version).
"""

from __future__ import annotations

import contextlib
import json
import sqlite3
import threading
import time
from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from acquire.errors import JournalError
from acquire.utc import utc_text

SCHEMA_VERSION = 1
JOURNAL_NAME = "journal.sqlite"

_SCHEMA_V1 = """
CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE runs (
    id INTEGER PRIMARY KEY,
    kind TEXT NOT NULL,
    plan TEXT NOT NULL,
    plan_path TEXT,
    station TEXT,
    operator TEXT,
    instrument TEXT,
    resource TEXT,
    job_id TEXT,
    started_utc TEXT NOT NULL,
    ended_utc TEXT,
    state TEXT NOT NULL DEFAULT 'running',
    note TEXT
);
CREATE TABLE measurements (
    id INTEGER PRIMARY KEY,
    run_id INTEGER NOT NULL REFERENCES runs(id),
    seq INTEGER NOT NULL,
    serial TEXT NOT NULL DEFAULT '',
    attempt INTEGER NOT NULL DEFAULT 1,
    golden INTEGER NOT NULL DEFAULT 0,
    time_utc TEXT NOT NULL,
    state TEXT NOT NULL DEFAULT 'pending',
    touchstone TEXT,
    raw_touchstone TEXT,
    summary TEXT,
    verdict TEXT,
    exit_code INTEGER,
    worst_margin REAL,
    metrics_json TEXT,
    verdict_json TEXT,
    cal_id TEXT,
    cal_age_s REAL,
    instrument TEXT,
    note TEXT,
    UNIQUE (run_id, seq)
);
CREATE INDEX measurements_serial ON measurements(serial);
CREATE TABLE faults (
    id INTEGER PRIMARY KEY,
    run_id INTEGER REFERENCES runs(id),
    seq INTEGER,
    time_utc TEXT NOT NULL,
    kind TEXT NOT NULL,
    message TEXT NOT NULL,
    action TEXT
);
CREATE TABLE golden_checks (
    id INTEGER PRIMARY KEY,
    run_id INTEGER NOT NULL REFERENCES runs(id),
    time_utc TEXT NOT NULL,
    serial TEXT NOT NULL,
    passed INTEGER NOT NULL,
    worst_db REAL,
    worst_deg REAL,
    touchstone TEXT,
    message TEXT
);
CREATE TABLE alarms (
    id INTEGER PRIMARY KEY,
    run_id INTEGER NOT NULL REFERENCES runs(id),
    seq INTEGER,
    time_utc TEXT NOT NULL,
    metric TEXT NOT NULL,
    value REAL,
    threshold REAL,
    message TEXT NOT NULL
);
"""

# version -> SQL that upgrades (version - 1) to version; version 1 is the base schema.
MIGRATIONS: dict[int, str] = {1: _SCHEMA_V1}

MEASUREMENT_STATES = ("pending", "stored", "missed", "failed", "measured")


@dataclass(frozen=True)
class Planned:
    """A measurement journalled as pending, with the file names it will get."""

    id: int
    run_id: int
    seq: int
    serial: str
    attempt: int
    touchstone: Path


class Journal:
    """One journal file; safe to share between threads of one process (serialised)."""

    def __init__(self, path: Path | str, *, timeout_s: float = 30.0) -> None:
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self._lock = threading.RLock()
        try:
            self._db = sqlite3.connect(
                self.path, timeout=timeout_s, isolation_level=None, check_same_thread=False
            )
            self._db.row_factory = sqlite3.Row
            _retry_busy(self._enter_wal, timeout_s)
            self._db.execute("PRAGMA synchronous=FULL")
            self._db.execute("PRAGMA foreign_keys=ON")
            _retry_busy(self._migrate, timeout_s)
        except sqlite3.DatabaseError as exc:
            raise JournalError(f"journal {self.path}: {exc}") from None

    def _enter_wal(self) -> None:
        # Changing the journal mode takes a lock without SQLite's busy handler, so only
        # ask for it when the file is not in WAL mode already (a new journal).
        if self._db.execute("PRAGMA journal_mode").fetchone()[0].lower() != "wal":
            self._db.execute("PRAGMA journal_mode=WAL")

    @classmethod
    def in_folder(cls, folder: Path | str) -> Journal:
        return cls(Path(folder) / JOURNAL_NAME)

    def close(self) -> None:
        with self._lock:
            self._db.close()

    def __enter__(self) -> Journal:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # -- schema ------------------------------------------------------------------------
    def _migrate(self) -> None:
        if self._stored_version() == SCHEMA_VERSION:
            return  # the usual case: no write lock needed to open the journal
        with self.transaction() as db:
            has_meta = db.execute(
                "SELECT 1 FROM sqlite_master WHERE type='table' AND name='meta'"
            ).fetchone()
            version = 0
            if has_meta:
                row = db.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
                version = int(row[0]) if row else 0
            if version > SCHEMA_VERSION:
                raise JournalError(
                    f"journal {self.path}: schema version {version} is newer than this "
                    f"sweepd understands ({SCHEMA_VERSION}); upgrade sweepd"
                )
            for target in range(version + 1, SCHEMA_VERSION + 1):
                db.executescript_safe(MIGRATIONS[target])
                db.execute(
                    "INSERT OR REPLACE INTO meta(key, value) VALUES ('schema_version', ?)",
                    (str(target),),
                )

    def _stored_version(self) -> int:
        has_meta = self._db.execute(
            "SELECT 1 FROM sqlite_master WHERE type='table' AND name='meta'"
        ).fetchone()
        if not has_meta:
            return 0
        row = self._db.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
        return int(row[0]) if row else 0

    @property
    def schema_version(self) -> int:
        row = self.query_one("SELECT value FROM meta WHERE key='schema_version'")
        return int(row[0])

    @contextmanager
    def transaction(self) -> Iterator[_Tx]:
        """BEGIN IMMEDIATE ... COMMIT, rolled back on any exception."""
        with self._lock:
            self._db.execute("BEGIN IMMEDIATE")
            try:
                yield _Tx(self._db)
            except BaseException:
                self._db.execute("ROLLBACK")
                raise
            self._db.execute("COMMIT")

    def query(self, sql: str, params: tuple | Mapping = ()) -> list[sqlite3.Row]:
        with self._lock:
            return self._db.execute(sql, params).fetchall()

    def query_one(self, sql: str, params: tuple | Mapping = ()) -> sqlite3.Row | None:
        with self._lock:
            return self._db.execute(sql, params).fetchone()

    # -- runs --------------------------------------------------------------------------
    def start_run(self, kind: str, plan: str, **fields: Any) -> int:
        allowed = {"plan_path", "station", "operator", "instrument", "resource", "job_id", "note"}
        unknown = set(fields) - allowed
        if unknown:
            raise ValueError(f"unknown run fields {sorted(unknown)}")
        cols = ["kind", "plan", "started_utc", *fields]
        values = [kind, plan, utc_text(), *(_text(v) for v in fields.values())]
        with self.transaction() as db:
            cur = db.execute(
                f"INSERT INTO runs({', '.join(cols)}) VALUES ({', '.join('?' * len(cols))})",
                values,
            )
            return int(cur.lastrowid)

    def update_run(self, run_id: int, **fields: Any) -> None:
        allowed = {"instrument", "resource", "state", "note", "ended_utc", "station", "operator"}
        if set(fields) - allowed:
            raise ValueError(f"unknown run fields {sorted(set(fields) - allowed)}")
        if not fields:
            return
        sets = ", ".join(f"{k} = ?" for k in fields)
        with self.transaction() as db:
            db.execute(f"UPDATE runs SET {sets} WHERE id = ?", (*fields.values(), run_id))

    def end_run(self, run_id: int, state: str = "finished", note: str | None = None) -> None:
        fields: dict[str, Any] = {"state": state, "ended_utc": utc_text()}
        if note is not None:
            fields["note"] = note
        self.update_run(run_id, **fields)

    # -- measurements -----------------------------------------------------------------
    def next_seq(self, run_id: int) -> int:
        row = self.query_one("SELECT MAX(seq) FROM measurements WHERE run_id = ?", (run_id,))
        return 0 if row[0] is None else int(row[0]) + 1

    def attempts(self, plan: str, serial: str) -> int:
        """How many measurements of ``serial`` under ``plan`` were stored before."""
        row = self.query_one(
            "SELECT COUNT(*) FROM measurements m JOIN runs r ON r.id = m.run_id "
            "WHERE r.plan = ? AND m.serial = ? AND m.state = 'stored' AND m.golden = 0",
            (plan, serial),
        )
        return int(row[0])

    def plan_measurement(self, run_id: int, seq: int, touchstone: Path, *, serial: str = "",
                         golden: bool = False, attempt: int | None = None) -> Planned:
        """Journal a measurement as pending before its files are written."""
        with self.transaction() as db:
            if attempt is None:
                plan = db.execute("SELECT plan FROM runs WHERE id = ?", (run_id,)).fetchone()[0]
                row = db.execute(
                    "SELECT COUNT(*) FROM measurements m JOIN runs r ON r.id = m.run_id "
                    "WHERE r.plan = ? AND m.serial = ? AND m.state = 'stored' "
                    "AND m.golden = 0",
                    (plan, serial),
                ).fetchone()
                attempt = int(row[0]) + 1 if serial and not golden else 1
            try:
                cur = db.execute(
                    "INSERT INTO measurements(run_id, seq, serial, attempt, golden, time_utc, "
                    "state, touchstone) VALUES (?, ?, ?, ?, ?, ?, 'pending', ?)",
                    (run_id, seq, serial, attempt, int(golden), utc_text(), str(touchstone)),
                )
            except sqlite3.IntegrityError:
                raise JournalError(
                    f"journal {self.path}: sweep {seq} of run {run_id} is already journalled"
                ) from None
            return Planned(int(cur.lastrowid), run_id, seq, serial, attempt, touchstone)

    def store_measurement(self, planned: Planned, *, touchstone: Path, summary: Path | None,
                          raw_touchstone: Path | None = None, verdict: str | None = None,
                          exit_code: int | None = None, worst_margin: float | None = None,
                          metrics: Mapping[str, Any] | None = None,
                          verdict_json: str | None = None, cal_id: str | None = None,
                          cal_age_s: float | None = None, instrument: str | None = None,
                          note: str | None = None) -> None:
        """Mark a planned measurement stored, with everything known about it."""
        with self.transaction() as db:
            db.execute(
                "UPDATE measurements SET state='stored', touchstone=?, summary=?, "
                "raw_touchstone=?, verdict=?, exit_code=?, worst_margin=?, metrics_json=?, "
                "verdict_json=?, cal_id=?, cal_age_s=?, instrument=?, note=? WHERE id=?",
                (str(touchstone), _text(summary), _text(raw_touchstone), verdict, exit_code,
                 worst_margin, json.dumps(metrics) if metrics is not None else None,
                 verdict_json, cal_id, cal_age_s, instrument, note, planned.id),
            )

    def record_missed(self, run_id: int, seq: int, reason: str, *, serial: str = "") -> None:
        """A sweep that was due but could not be taken (fault, stop): recorded, not lost."""
        with self.transaction() as db:
            db.execute(
                "INSERT INTO measurements(run_id, seq, serial, time_utc, state, note) "
                "VALUES (?, ?, ?, ?, 'missed', ?) "
                "ON CONFLICT(run_id, seq) DO UPDATE SET state='missed', note=excluded.note "
                "WHERE state = 'pending'",
                (run_id, seq, serial, utc_text(), reason),
            )

    def record_measured(self, run_id: int, seq: int, *, metrics: Mapping[str, Any],
                        verdict: str | None = None, exit_code: int | None = None,
                        worst_margin: float | None = None, verdict_json: str | None = None,
                        cal_id: str | None = None, cal_age_s: float | None = None,
                        instrument: str | None = None, note: str | None = None) -> None:
        """A sweep taken and judged whose data are not kept as a file: metrics only."""
        with self.transaction() as db:
            try:
                db.execute(
                    "INSERT INTO measurements(run_id, seq, time_utc, state, verdict, exit_code, "
                    "worst_margin, metrics_json, verdict_json, cal_id, cal_age_s, instrument, "
                    "note) VALUES (?, ?, ?, 'measured', ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                    (run_id, seq, utc_text(), verdict, exit_code, worst_margin,
                     json.dumps(metrics), verdict_json, cal_id, cal_age_s, instrument, note),
                )
            except sqlite3.IntegrityError:
                raise JournalError(
                    f"journal {self.path}: sweep {seq} of run {run_id} is already journalled"
                ) from None

    def fail_measurement(self, planned: Planned, reason: str) -> None:
        with self.transaction() as db:
            db.execute("UPDATE measurements SET state='failed', note=? WHERE id=?",
                       (reason, planned.id))

    def reconcile(self, *, adopt: bool = True,
                  run_id: int | None = None) -> list[tuple[int, str]]:
        """Settle pending rows left by a crash: adopt complete files, mark the rest missed.

        Captures are written summary first, then the raw copy, then the Touchstone file
        itself (see ``acquire.measure.store``), so a Touchstone file that exists is
        complete and so is everything written before it: an adopted row gets its summary,
        raw copy, verdict and metrics from those files. A row whose Touchstone file never
        landed is marked missed, and the files written ahead of it are removed so that the
        folder and the journal agree. ``run_id`` limits this to one run
        (a daemon resuming one job must not touch the rows another process has in
        flight). Returns ``(measurement id, new state)`` for each row changed.
        """
        changed = []
        sql = "SELECT id, touchstone FROM measurements WHERE state='pending'"
        params: tuple = ()
        if run_id is not None:
            sql, params = sql + " AND run_id = ?", (run_id,)
        for row in self.query(sql, params):
            path = Path(row["touchstone"]) if row["touchstone"] else None
            if adopt and path is not None and path.is_file():
                self._adopt(int(row["id"]), path)
                changed.append((int(row["id"]), "stored"))
                continue
            if path is not None and not path.exists():
                _remove_orphans(path)
            with self.transaction() as db:
                db.execute("UPDATE measurements SET state='missed', note=? WHERE id=?",
                           ("interrupted before its file was written", row["id"]))
            changed.append((int(row["id"]), "missed"))
        return changed

    def _adopt(self, measurement_id: int, touchstone: Path) -> None:
        summary = touchstone.with_suffix(".json")
        raw = touchstone.with_name(f"{touchstone.stem}.raw{touchstone.suffix}")
        fields: dict[str, Any] = {
            "summary": str(summary) if summary.is_file() else None,
            "raw_touchstone": str(raw) if raw.is_file() else None,
        }
        try:
            data = json.loads(summary.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            data = None
        if isinstance(data, dict):
            capture = data.pop("capture", None) or {}
            judged = bool(data.get("checks"))
            cal = capture.get("calibration") or {}
            fields.update(
                verdict=data.get("verdict") if judged else None,
                exit_code=data.get("exit_code") if judged else None,
                worst_margin=worst_margin(data),
                metrics_json=json.dumps(data.get("metrics")),
                verdict_json=json.dumps(data),
                cal_id=cal.get("id"), cal_age_s=cal.get("age_s"),
                instrument=capture.get("instrument"),
            )
        fields["note"] = "adopted after a restart: its files were complete"
        sets = ", ".join(f"{k} = ?" for k in fields)
        with self.transaction() as db:
            db.execute(f"UPDATE measurements SET state='stored', {sets} WHERE id=?",
                       (*fields.values(), measurement_id))

    # -- faults, golden checks, alarms ----------------------------------------------
    def record_fault(self, run_id: int | None, kind: str, message: str, *,
                     action: str | None = None, seq: int | None = None) -> None:
        with self.transaction() as db:
            db.execute(
                "INSERT INTO faults(run_id, seq, time_utc, kind, message, action) "
                "VALUES (?, ?, ?, ?, ?, ?)",
                (run_id, seq, utc_text(), kind, message, action),
            )

    def record_golden(self, run_id: int, serial: str, passed: bool, *,
                      worst_db: float | None = None, worst_deg: float | None = None,
                      touchstone: Path | None = None, message: str = "") -> None:
        with self.transaction() as db:
            db.execute(
                "INSERT INTO golden_checks(run_id, time_utc, serial, passed, worst_db, "
                "worst_deg, touchstone, message) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                (run_id, utc_text(), serial, int(passed), worst_db, worst_deg,
                 _text(touchstone), message),
            )

    def record_alarm(self, run_id: int, metric: str, message: str, *, seq: int | None = None,
                     value: float | None = None, threshold: float | None = None) -> None:
        with self.transaction() as db:
            db.execute(
                "INSERT INTO alarms(run_id, seq, time_utc, metric, value, threshold, message) "
                "VALUES (?, ?, ?, ?, ?, ?, ?)",
                (run_id, seq, utc_text(), metric, value, threshold, message),
            )


class _Tx:
    """The connection inside a transaction; ``executescript`` would commit, so split."""

    def __init__(self, db: sqlite3.Connection) -> None:
        self._db = db

    def execute(self, sql: str, params: tuple | Mapping | list = ()) -> sqlite3.Cursor:
        return self._db.execute(sql, params)

    def executescript_safe(self, script: str) -> None:
        for statement in script.split(";"):
            if statement.strip():
                self._db.execute(statement)


def _retry_busy(step: Callable[[], None], timeout_s: float) -> None:
    """Run ``step``, retrying while another connection holds a lock SQLite will not wait
    for (switching to WAL, recovering a WAL after a crash)."""
    deadline = time.monotonic() + timeout_s
    delay = 0.005
    while True:
        try:
            return step()
        except sqlite3.OperationalError as exc:
            text = str(exc).lower()
            if ("locked" not in text and "busy" not in text) or time.monotonic() > deadline:
                raise
        time.sleep(delay)
        delay = min(delay * 2, 0.2)


def _remove_orphans(touchstone: Path) -> None:
    """Files written ahead of a Touchstone file that never landed (its summary, raw copy):
    they describe a sweep the journal records as missed, so they go."""
    for orphan in (touchstone.with_suffix(".json"),
                   touchstone.with_name(f"{touchstone.stem}.raw{touchstone.suffix}")):
        with contextlib.suppress(FileNotFoundError):
            orphan.unlink()


def worst_margin(verdict: Mapping[str, Any]) -> float | None:
    """The smallest margin over all mask segments of a verdict dict (negative: failing)."""
    margins = [
        float(segment["worst"]["margin"])
        for check in verdict.get("checks") or ()
        for segment in check.get("segments") or ()
        if (segment.get("worst") or {}).get("margin") is not None
    ]
    return min(margins) if margins else None


def _text(value: Any) -> str | None:
    return None if value is None else str(value)
