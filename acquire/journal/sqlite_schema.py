"""The SQLite journal's tables and their migrations.

The schema version is SQLite's ``PRAGMA user_version``. Version 1 kept it in a ``meta``
table instead; ``meta.schema_version`` is still written with every migration so that an
older sweepd refuses a newer file by name instead of misreading it. ``MIGRATIONS[n]``
upgrades a version ``n - 1`` file to ``n`` inside one transaction; a new file runs them
all from 1. To change the schema: append a migration, raise ``SCHEMA_VERSION``, add its
test (``tests/test_journal_migrations.py``).
"""

from __future__ import annotations

SCHEMA_VERSION = 5

_V1 = """
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
)
"""

# 2: the version moves to PRAGMA user_version; a pending row whose file never landed is
# 'interrupted', no longer 'missed' (which now only means "due but never taken").
_V2 = """
UPDATE measurements SET state = 'interrupted'
    WHERE state = 'missed' AND note = 'interrupted before its file was written';
CREATE INDEX measurements_run_state ON measurements(run_id, state);
CREATE INDEX runs_kind_state ON runs(kind, state)
"""

# 3: a soak job's unique identity (a UUID) beside its short per-spool name.
_V3 = """
ALTER TABLE runs ADD COLUMN job_uid TEXT;
CREATE UNIQUE INDEX runs_job_uid ON runs(job_uid) WHERE job_uid IS NOT NULL
"""

# 4: the process that owns a run (a lock token, its pid and host), so that a later start
# settles only runs whose process is gone.
_V4 = """
ALTER TABLE runs ADD COLUMN owner TEXT;
ALTER TABLE runs ADD COLUMN pid INTEGER;
ALTER TABLE runs ADD COLUMN host TEXT
"""

# 5: a soak held for disk space journals one hold (the span of sweep indices it did not
# take), not one missed row per sweep.
_V5 = """
CREATE TABLE holds (
    id INTEGER PRIMARY KEY,
    run_id INTEGER NOT NULL REFERENCES runs(id),
    first_seq INTEGER NOT NULL,
    last_seq INTEGER,
    started_utc TEXT NOT NULL,
    ended_utc TEXT,
    reason TEXT NOT NULL
)
"""

MIGRATIONS: dict[int, str] = {1: _V1, 2: _V2, 3: _V3, 4: _V4, 5: _V5}
