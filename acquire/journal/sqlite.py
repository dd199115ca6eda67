"""The journal in one SQLite file (WAL mode, ``synchronous=FULL``), kept in the output
folder as ``journal.sqlite``. Every SQL statement of sweepd lives in this module,
``sqlite_file`` and ``sqlite_schema``; everything else speaks ``JournalStore``.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

from acquire.errors import JournalError
from acquire.journal.sqlite_file import SqliteFile, text_or_none
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
    "cal_age_s, instrument, note"
)
_STORED_ATTEMPTS = (
    "SELECT COUNT(*) FROM measurements m JOIN runs r ON r.id = m.run_id "
    "WHERE r.plan = ? AND m.serial = ? AND m.state = 'stored' AND m.golden = 0"
)


class SqliteJournal(SqliteFile, JournalStore):
    """One journal file behind the ``JournalStore`` interface."""

    # -- runs --------------------------------------------------------------------------
    def start_run(self, kind: str, plan: str, **fields: Any) -> int:
        unknown = set(fields) - set(RUN_FIELDS)
        if unknown:
            raise ValueError(f"unknown run fields {sorted(unknown)}")
        cols = ["kind", "plan", "started_utc", *fields]
        values = [kind, plan, utc_text(), *(text_or_none(v) for v in fields.values())]
        with self._tx() as db:
            cur = db.execute(
                f"INSERT INTO runs({', '.join(cols)}) VALUES ({', '.join('?' * len(cols))})",
                values,
            )
            return int(cur.lastrowid)

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
        return self._rows(sql + " ORDER BY id", params)

    # -- measurements: writing ---------------------------------------------------------------
    def next_seq(self, run_id: int) -> int:
        top = self._value("SELECT MAX(seq) FROM measurements WHERE run_id = ?", (run_id,))
        return 0 if top is None else int(top) + 1

    def attempts(self, plan: str, serial: str) -> int:
        return int(self._value(_STORED_ATTEMPTS, (plan, serial)))

    def plan_measurement(self, run_id: int, seq: int, touchstone: Path, *, serial: str = "",
                         golden: bool = False, attempt: int | None = None) -> Planned:
        with self._tx() as db:
            if attempt is None:
                plan = db.execute("SELECT plan FROM runs WHERE id = ?", (run_id,)).fetchone()[0]
                before = db.execute(_STORED_ATTEMPTS, (plan, serial)).fetchone()[0]
                attempt = int(before) + 1 if serial and not golden else 1
            try:
                cur = db.execute(
                    "INSERT INTO measurements(run_id, seq, serial, attempt, golden, time_utc, "
                    "state, touchstone) VALUES (?, ?, ?, ?, ?, ?, 'pending', ?)",
                    (run_id, seq, serial, attempt, int(golden), utc_text(), str(touchstone)),
                )
            except sqlite3.IntegrityError:
                raise self._taken(run_id, seq) from None
            return Planned(int(cur.lastrowid), run_id, seq, serial, attempt, touchstone)

    def _taken(self, run_id: int, seq: int) -> JournalError:
        return JournalError(f"journal {self.path}: sweep {seq} of run {run_id} is already "
                            "journalled")

    def store_measurement(self, planned: Planned, *, touchstone: Path, summary: Path | None,
                          raw_touchstone: Path | None, fields: StoredFields) -> None:
        with self._tx() as db:
            db.execute(
                "UPDATE measurements SET state='stored', touchstone=?, summary=?, "
                "raw_touchstone=?, verdict=?, exit_code=?, worst_margin=?, metrics_json=?, "
                "verdict_json=?, cal_id=?, cal_age_s=?, instrument=?, note=? WHERE id=?",
                (str(touchstone), text_or_none(summary), text_or_none(raw_touchstone),
                 *_stored(fields),
                 planned.id),
            )

    def record_measured(self, run_id: int, seq: int, fields: StoredFields) -> None:
        with self._tx() as db:
            try:
                db.execute(
                    "INSERT INTO measurements(run_id, seq, time_utc, state, verdict, exit_code, "
                    "worst_margin, metrics_json, verdict_json, cal_id, cal_age_s, instrument, "
                    "note) VALUES (?, ?, ?, 'measured', ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                    (run_id, seq, utc_text(), *_stored(fields)),
                )
            except sqlite3.IntegrityError:
                raise self._taken(run_id, seq) from None

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
        sql = "SELECT id, run_id, touchstone FROM measurements WHERE state = 'pending'"
        if run_id is None:
            return self._rows(sql + " ORDER BY id")
        return self._rows(sql + " AND run_id = ? ORDER BY id", (run_id,))

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

    def measurements(self, *, since_utc: str | None = None, plan: str | None = None
                     ) -> list[Row]:
        where, params = _since_and_plan("m.time_utc", since_utc, plan)
        columns = ", ".join(f"m.{c.strip()}" for c in _MEASUREMENT_COLUMNS.split(","))
        return self._rows(f"SELECT {columns}, r.plan, r.station FROM measurements m "
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
            cur = db.execute("INSERT INTO holds(run_id, first_seq, started_utc, reason) "
                             "VALUES (?, ?, ?, ?)", (run_id, first_seq, utc_text(), reason))
            return int(cur.lastrowid)

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
