"""Rows forwarded from a station's outbox into the shared PostgreSQL store, as upserts.

Each row is written under a key it already had at the station, so forwarding it again
(after a lost reply, a crash between the server's commit and the outbox's) updates the
same row: runs by ``run_uid``, measurements by (run, sweep index), faults, golden
checks, alarms and holds by ``source_key`` (``origin#table#local id``). Runs are
forwarded before anything that refers to them (the outbox keeps the order of changes).
``db`` is a server transaction taking ``?`` placeholders.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

RUN_COLUMNS = ("kind", "plan", "plan_path", "station", "operator", "instrument", "resource",
               "job_id", "started_utc", "ended_utc", "state", "note", "job_uid", "owner",
               "pid", "host", "lot", "run_uid", "origin")
MEASUREMENT_COLUMNS = ("seq", "serial", "attempt", "golden", "time_utc", "state",
                       "touchstone", "raw_touchstone", "summary", "verdict", "exit_code",
                       "worst_margin", "metrics_json", "verdict_json", "cal_id", "cal_age_s",
                       "instrument", "note", "capture_id", "touchstone_sha256",
                       "summary_sha256")
CHILD_COLUMNS = {
    "faults": ("seq", "time_utc", "kind", "message", "action"),
    "golden_checks": ("time_utc", "serial", "passed", "worst_db", "worst_deg", "touchstone",
                      "message"),
    "alarms": ("seq", "time_utc", "metric", "value", "threshold", "message"),
    "holds": ("first_seq", "last_seq", "started_utc", "ended_utc", "reason"),
}
TABLES = ("runs", "measurements", *CHILD_COLUMNS)


def _upsert(db: Any, table: str, columns: tuple[str, ...], key: str,
            values: Mapping[str, Any]) -> int:
    names = ", ".join(columns)
    marks = ", ".join("?" for _ in columns)
    updates = ", ".join(f"{c} = EXCLUDED.{c}" for c in columns if c not in key.split(", "))
    row = db.execute(f"INSERT INTO {table} ({names}) VALUES ({marks}) ON CONFLICT ({key}) "
                     f"DO UPDATE SET {updates} RETURNING id",
                     tuple(values[c] for c in columns)).fetchone()
    return int(row[0])


def upsert_run(db: Any, row: Mapping[str, Any]) -> int:
    """The server's id of this run, created or brought up to date."""
    return _upsert_partial(db, "runs", RUN_COLUMNS, "run_uid", row)


def _upsert_partial(db: Any, table: str, columns: tuple[str, ...], key: str,
                    row: Mapping[str, Any]) -> int:
    """An upsert on a partial unique index (``key IS NOT NULL``)."""
    names = ", ".join(columns)
    marks = ", ".join("?" for _ in columns)
    updates = ", ".join(f"{c} = EXCLUDED.{c}" for c in columns if c != key)
    found = db.execute(
        f"INSERT INTO {table} ({names}) VALUES ({marks}) ON CONFLICT ({key}) WHERE {key} IS "
        f"NOT NULL DO UPDATE SET {updates} RETURNING id",
        tuple(row[c] for c in columns)).fetchone()
    return int(found[0])


def upsert_measurement(db: Any, run_id: int, row: Mapping[str, Any]) -> int:
    values = {**row, "run_id": run_id}
    return _upsert(db, "measurements", ("run_id", *MEASUREMENT_COLUMNS), "run_id, seq",
                   values)


def upsert_child(db: Any, table: str, run_id: int | None, source_key: str,
                 row: Mapping[str, Any]) -> int:
    columns = ("run_id", "source_key", *CHILD_COLUMNS[table])
    values = {**row, "run_id": run_id, "source_key": source_key}
    return _upsert(db, table, columns, "source_key", values)
