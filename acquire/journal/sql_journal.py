"""The journal's queries, written once for both backends (SQLite and PostgreSQL).

``SqlJournal`` implements ``JournalStore`` in the SQL both databases accept, with ``?``
placeholders. A backend supplies the connection (``_tx``, ``_rows``, ``_one``,
``_value``), how an insert reports its new id (``_insert``) and which error is a unique-key
clash (``_duplicate``); dialect details stay in the backend's own modules.

Idempotent keys: every run gets a ``run_uid`` and every planned capture a ``capture_id``
(random, made before the write). Journalling the same key again returns the row already
there, so a writer that retries after a lost reply never makes a duplicate.
"""

from __future__ import annotations

import uuid
from collections.abc import Iterable, Iterator, Mapping, Sequence
from contextlib import AbstractContextManager, contextmanager
from pathlib import Path
from typing import Any, Protocol

from acquire.errors import JournalError
from acquire.journal.hashes import file_sha256
from acquire.journal.store import (
    FILL_FIELDS,
    RUN_FIELDS,
    RUN_UPDATES,
    JournalStore,
    Planned,
    Row,
    StoredFields,
)
from acquire.utc import utc_text

_MEASUREMENT_COLUMNS = (
    "id, run_id, seq, serial, attempt, golden, time_utc, state, touchstone, raw_touchstone, "
    "summary, verdict, exit_code, worst_margin, metrics_json, verdict_json, cal_id, "
    "cal_age_s, instrument, note, capture_id, touchstone_sha256, summary_sha256"
)
_STORED_ATTEMPTS = (
    "SELECT COUNT(*) FROM measurements m JOIN runs r ON r.id = m.run_id "
    "WHERE r.plan = ? AND m.serial = ? AND m.state = 'stored' AND m.golden = 0"
)


class Cursor(Protocol):
    rowcount: int

    def fetchone(self) -> Any: ...


class Connection(Protocol):
    def execute(self, sql: str, params: Sequence[Any] = ...) -> Cursor: ...


class SqlJournal(JournalStore):
    """The ``JournalStore`` queries over a backend's connection (see the module docstring).
    ``origin`` names the station folder a shared store is opened for: its runs carry it,
    and only its own runs are settled after a crash (``open_runs``, ``pending``)."""

    where: str
    origin: str | None = None
    scoped = True  # settle only runs of ``origin`` (False: the file is the station's own)

    # -- what a backend supplies -----------------------------------------------------------
    def _tx(self) -> AbstractContextManager[Connection]:
        raise NotImplementedError

    def _rows(self, sql: str, params: Sequence[Any] = ()) -> list[Row]:
        raise NotImplementedError

    def _insert(self, db: Connection, sql: str, params: Sequence[Any]) -> int:
        """Run an INSERT into a table with an ``id`` key; the new row's id."""
        raise NotImplementedError

    def _duplicate(self, exc: BaseException) -> bool:
        """True when ``exc`` is a unique-key clash."""
        raise NotImplementedError

    def _one(self, sql: str, params: Sequence[Any] = ()) -> Row | None:
        rows = self._rows(sql, params)
        return rows[0] if rows else None

    def _value(self, sql: str, params: Sequence[Any] = ()) -> Any:
        row = self._one(sql, params)
        return None if row is None else next(iter(row.values()))

    # -- runs --------------------------------------------------------------------------
    def start_run(self, kind: str, plan: str, *, run_uid: str | None = None,
                  **fields: Any) -> int:
        """A new run; the same ``run_uid`` again (a retry) returns the run already there."""
        unknown = set(fields) - set(RUN_FIELDS)
        if unknown:
            raise ValueError(f"unknown run fields {sorted(unknown)}")
        run_uid = run_uid or uuid.uuid4().hex
        cols = ["kind", "plan", "started_utc", "run_uid", "origin", *fields]
        values = [kind, plan, utc_text(), run_uid, self.origin,
                  *(text_or_none(v) for v in fields.values())]
        with self._tx() as db:
            known = db.execute("SELECT id FROM runs WHERE run_uid = ?", (run_uid,)).fetchone()
            if known is not None:
                return int(known[0])
            return self._insert(
                db, f"INSERT INTO runs({', '.join(cols)}) "
                f"VALUES ({', '.join('?' * len(cols))})", values)

    def update_run(self, run_id: int, **fields: Any) -> None:
        unknown = set(fields) - set(RUN_UPDATES)
        if unknown:
            raise ValueError(f"unknown run fields {sorted(unknown)}")
        if not fields:
            return
        sets = ", ".join(f"{k} = ?" for k in fields)
        with self._tx() as db:
            db.execute(f"UPDATE runs SET {sets} WHERE id = ?", (*fields.values(), run_id))

    def run(self, run_id: int) -> Row | None:
        return self._one("SELECT * FROM runs WHERE id = ?", (run_id,))

    def soak_run(self, job_uid: str) -> Row | None:
        return self._one("SELECT * FROM runs WHERE job_uid = ? AND kind = 'soak'",
                         (job_uid,))

    def open_runs(self, kinds: Sequence[str], plan: str | None = None) -> list[Row]:
        sql = (f"SELECT * FROM runs WHERE state = 'running' AND kind IN "
               f"({', '.join('?' * len(kinds))})")
        params: list[Any] = list(kinds)
        if plan is not None:
            sql += " AND plan = ?"
            params.append(plan)
        if self.scoped and self.origin is not None:
            sql += " AND origin = ?"
            params.append(self.origin)
        return self._rows(sql + " ORDER BY id", params)

    # -- measurements: writing ---------------------------------------------------------------
    def next_seq(self, run_id: int) -> int:
        top = self._value("SELECT MAX(seq) FROM measurements WHERE run_id = ?", (run_id,))
        return 0 if top is None else int(top) + 1

    def attempts(self, plan: str, serial: str) -> int:
        return int(self._value(_STORED_ATTEMPTS, (plan, serial)))

    def plan_measurement(self, run_id: int, seq: int, touchstone: Path, *, serial: str = "",
                         golden: bool = False, attempt: int | None = None,
                         capture_id: str | None = None) -> Planned:
        capture_id = capture_id or uuid.uuid4().hex
        with self._tx() as db:
            known = self._planned(db, capture_id)
            if known is not None:
                return known
            if attempt is None:
                plan = db.execute("SELECT plan FROM runs WHERE id = ?", (run_id,)).fetchone()[0]
                before = db.execute(_STORED_ATTEMPTS, (plan, serial)).fetchone()[0]
                attempt = int(before) + 1 if serial and not golden else 1
            with self._unique(run_id, seq):
                new_id = self._insert(
                    db, "INSERT INTO measurements(run_id, seq, serial, attempt, golden, "
                    "time_utc, state, touchstone, capture_id) "
                    "VALUES (?, ?, ?, ?, ?, ?, 'pending', ?, ?)",
                    (run_id, seq, serial, attempt, int(golden), utc_text(), str(touchstone),
                     capture_id))
            return Planned(new_id, run_id, seq, serial, attempt, touchstone, capture_id)

    def _planned(self, db: Connection, capture_id: str) -> Planned | None:
        """The capture already journalled under this key (a retry), if any."""
        row = db.execute("SELECT id, run_id, seq, serial, attempt, touchstone FROM "
                         "measurements WHERE capture_id = ?", (capture_id,)).fetchone()
        if row is None:
            return None
        mid, run_id, seq, serial, attempt, touchstone = tuple(row)
        return Planned(int(mid), int(run_id), int(seq), serial, int(attempt),
                       Path(touchstone), capture_id)

    @contextmanager
    def _unique(self, run_id: int, seq: int) -> Iterator[None]:
        """A unique-key clash inside the block becomes 'already journalled'."""
        try:
            yield
        except Exception as exc:
            if self._duplicate(exc):
                raise self._taken(run_id, seq) from None
            raise

    def _taken(self, run_id: int, seq: int) -> JournalError:
        return JournalError(f"journal {self.where}: sweep {seq} of run {run_id} is already "
                            "journalled")

    def store_measurement(self, planned: Planned, *, touchstone: Path, summary: Path | None,
                          raw_touchstone: Path | None, fields: StoredFields) -> None:
        hashes = (file_sha256(touchstone), file_sha256(summary))  # the bytes as they landed
        with self._tx() as db:
            db.execute(
                "UPDATE measurements SET state='stored', touchstone=?, summary=?, "
                "raw_touchstone=?, verdict=?, exit_code=?, worst_margin=?, metrics_json=?, "
                "verdict_json=?, cal_id=?, cal_age_s=?, instrument=?, note=?, "
                "touchstone_sha256=?, summary_sha256=? WHERE id=?",
                (str(touchstone), text_or_none(summary), text_or_none(raw_touchstone),
                 *_stored(fields), *hashes,
                 planned.id),
            )

    def record_measured(self, run_id: int, seq: int, fields: StoredFields) -> None:
        with self._tx() as db, self._unique(run_id, seq):
            db.execute(
                "INSERT INTO measurements(run_id, seq, time_utc, state, verdict, exit_code, "
                "worst_margin, metrics_json, verdict_json, cal_id, cal_age_s, instrument, "
                "note) VALUES (?, ?, ?, 'measured', ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                (run_id, seq, utc_text(), *_stored(fields)),
            )

    def record_missed(self, run_id: int, seqs: Iterable[int], reason: str, *,
                      serial: str = "") -> int:
        when = utc_text()
        added = 0
        with self._tx() as db:
            for seq in seqs:
                cur = db.execute(
                    "INSERT INTO measurements(run_id, seq, serial, time_utc, state, note) "
                    "VALUES (?, ?, ?, ?, 'missed', ?) ON CONFLICT(run_id, seq) DO NOTHING",
                    (run_id, seq, serial, when, reason),
                )
                added += cur.rowcount
        return added

    def fail_measurement(self, planned: Planned, reason: str) -> None:
        with self._tx() as db:
            db.execute("UPDATE measurements SET state='failed', note=? WHERE id=?",
                       (reason, planned.id))

    def fill_measurement(self, measurement_id: int, **fields: Any) -> None:
        unknown = set(fields) - set(FILL_FIELDS)
        if unknown:
            raise ValueError(f"unknown measurement fields {sorted(unknown)}")
        sets = ", ".join(f"{k} = ?" for k in fields)
        with self._tx() as db:
            db.execute(f"UPDATE measurements SET {sets} WHERE id = ?",
                       (*fields.values(), measurement_id))

    def pending(self, run_id: int | None = None) -> list[Row]:
        sql = ("SELECT m.id, m.run_id, m.touchstone FROM measurements m JOIN runs r "
               "ON r.id = m.run_id WHERE m.state = 'pending'")
        params: list[Any] = []
        if run_id is not None:
            sql += " AND m.run_id = ?"
            params.append(run_id)
        if self.scoped and self.origin is not None:
            sql += " AND r.origin = ?"
            params.append(self.origin)
        return self._rows(sql + " ORDER BY m.id", params)

    def settle(self, measurement_id: int, state: str, fields: Mapping[str, Any]) -> None:
        if state not in ("stored", "interrupted"):
            raise ValueError(f"a pending row settles as stored or interrupted, not {state}")
        self.fill_measurement(measurement_id, **fields)
        with self._tx() as db:
            db.execute("UPDATE measurements SET state = ? WHERE id = ? AND state = 'pending'",
                       (state, measurement_id))

    # -- measurements: reading ------------------------------------------------------------------
    def state_counts(self, run_id: int) -> tuple[dict[str, int], int | None]:
        rows = self._rows("SELECT state, COUNT(*) AS n, MAX(seq) AS top FROM measurements "
                          "WHERE run_id = ? GROUP BY state", (run_id,))
        tops = [int(r["top"]) for r in rows if r["top"] is not None]
        return {r["state"]: int(r["n"]) for r in rows}, (max(tops) if tops else None)

    def run_measurements(self, run_id: int, states: Sequence[str] | None = None,
                         *, limit: int | None = None, newest_first: bool = False
                         ) -> list[Row]:
        sql = f"SELECT {_MEASUREMENT_COLUMNS} FROM measurements WHERE run_id = ?"
        params: list[Any] = [run_id]
        if states is not None:
            sql += f" AND state IN ({', '.join('?' * len(states))})"
            params += list(states)
        sql += " ORDER BY seq DESC" if newest_first else " ORDER BY seq"
        if limit is not None:
            sql += " LIMIT ?"
            params.append(int(limit))
        return self._rows(sql, params)

    def measurements(self, *, since_utc: str | None = None, plan: str | None = None,
                     station: str | None = None, lot: str | None = None) -> list[Row]:
        where, params = _since_and_plan("m.time_utc", since_utc, plan)
        for column, value in (("r.station", station), ("r.lot", lot)):
            if value is not None:
                where += (" AND " if where else " WHERE ") + f"{column} = ?"
                params.append(value)
        columns = ", ".join(f"m.{c.strip()}" for c in _MEASUREMENT_COLUMNS.split(","))
        return self._rows(f"SELECT {columns}, r.plan, r.station, r.operator, r.lot, "
                          "r.instrument AS run_instrument FROM measurements m "
                          f"JOIN runs r ON r.id = m.run_id{where} ORDER BY m.time_utc, m.id",
                          params)

    def units_since(self, plan: str, since_utc: str) -> int:
        # ">=": journal times have millisecond resolution, and a unit journalled in the
        # same millisecond as the check (or the releasing cal) came after it.
        return int(self._value(
            "SELECT COUNT(*) FROM measurements m JOIN runs r ON r.id = m.run_id WHERE "
            "r.plan = ? AND m.golden = 0 AND m.state = 'stored' AND m.time_utc >= ?",
            (plan, since_utc)))

    # -- golden checks, faults, alarms -----------------------------------------------------------
    def record_golden(self, run_id: int, serial: str, passed: bool, *,
                      worst_db: float | None = None, worst_deg: float | None = None,
                      touchstone: Path | None = None, message: str = "") -> None:
        with self._tx() as db:
            db.execute(
                "INSERT INTO golden_checks(run_id, time_utc, serial, passed, worst_db, "
                "worst_deg, touchstone, message) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                (run_id, utc_text(), serial, int(passed), worst_db, worst_deg,
                 text_or_none(touchstone), message),
            )

    def last_golden(self, plan: str) -> Row | None:
        return self._one(
            "SELECT g.time_utc, g.passed, g.message FROM golden_checks g JOIN runs r "
            "ON r.id = g.run_id WHERE r.plan = ? ORDER BY g.time_utc DESC, g.id DESC LIMIT 1",
            (plan,))

    def last_good_golden_utc(self, plan: str) -> str | None:
        return self._value("SELECT MAX(g.time_utc) FROM golden_checks g JOIN runs r "
                           "ON r.id = g.run_id WHERE r.plan = ? AND g.passed = 1", (plan,))

    def golden_checks(self, *, since_utc: str | None = None, plan: str | None = None
                      ) -> list[Row]:
        where, params = _since_and_plan("g.time_utc", since_utc, plan)
        return self._rows("SELECT r.plan, g.passed, g.time_utc, g.serial, g.message FROM "
                          f"golden_checks g JOIN runs r ON r.id = g.run_id{where} "
                          "ORDER BY g.id", params)

    def record_fault(self, run_id: int | None, kind: str, message: str, *,
                     action: str | None = None, seq: int | None = None) -> None:
        with self._tx() as db:
            db.execute(
                "INSERT INTO faults(run_id, seq, time_utc, kind, message, action) "
                "VALUES (?, ?, ?, ?, ?, ?)",
                (run_id, seq, utc_text(), kind, message, action),
            )

    def faults(self, run_id: int, last: int | None = None) -> list[Row]:
        sql = ("SELECT id, seq, time_utc, kind, message, action FROM faults WHERE run_id = ?")
        if last is None:
            rows = self._rows(sql + " ORDER BY id", (run_id,))
        else:
            rows = self._rows(sql + " ORDER BY id DESC LIMIT ?", (run_id, int(last)))[::-1]
        return [{k: v for k, v in r.items() if k != "id"} for r in rows]

    def start_hold(self, run_id: int, first_seq: int, reason: str) -> int:
        with self._tx() as db:
            return self._insert(db, "INSERT INTO holds(run_id, first_seq, started_utc, "
                                "reason) VALUES (?, ?, ?, ?)",
                                (run_id, first_seq, utc_text(), reason))

    def end_hold(self, hold_id: int, last_seq: int) -> None:
        with self._tx() as db:
            db.execute("UPDATE holds SET last_seq = ?, ended_utc = ? WHERE id = ?",
                       (last_seq, utc_text(), hold_id))

    def holds(self, run_id: int) -> list[Row]:
        return self._rows("SELECT id, first_seq, last_seq, started_utc, ended_utc, reason "
                          "FROM holds WHERE run_id = ? ORDER BY id", (run_id,))

    def record_alarm(self, run_id: int, metric: str, message: str, *, seq: int | None = None,
                     value: float | None = None, threshold: float | None = None) -> None:
        with self._tx() as db:
            db.execute(
                "INSERT INTO alarms(run_id, seq, time_utc, metric, value, threshold, message) "
                "VALUES (?, ?, ?, ?, ?, ?, ?)",
                (run_id, seq, utc_text(), metric, value, threshold, message),
            )

    def alarms(self, run_id: int) -> list[Row]:
        return self._rows("SELECT seq, time_utc, metric, value, threshold, message FROM alarms "
                          "WHERE run_id = ? ORDER BY id", (run_id,))


def text_or_none(value: Any) -> str | None:
    return None if value is None else str(value)


def _stored(fields: StoredFields) -> tuple[Any, ...]:
    return (fields.verdict, fields.exit_code, fields.worst_margin, fields.metrics_json,
            fields.verdict_json, fields.cal_id, fields.cal_age_s, fields.instrument,
            fields.note)


def _since_and_plan(time_column: str, since_utc: str | None, plan: str | None
                    ) -> tuple[str, list[Any]]:
    where, params = [], []
    if since_utc is not None:
        where.append(f"{time_column} >= ?")
        params.append(since_utc)
    if plan is not None:
        where.append("r.plan = ?")
        params.append(plan)
    return (" WHERE " + " AND ".join(where) if where else ""), params
