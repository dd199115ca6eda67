"""The SQLite journal's tables and their migrations.

The schema version is SQLite's ``PRAGMA user_version``. Version 1 kept it in a ``meta``
table instead; ``meta.schema_version`` is still written with every migration so that an
older sweepd refuses a newer file by name instead of misreading it. ``MIGRATIONS[n]``
upgrades a version ``n - 1`` file to ``n`` inside one transaction; a new file runs them
all from 1. To change the schema: append a migration, raise ``SCHEMA_VERSION``, add its
test (``tests/test_journal_migrations.py``).
"""

from __future__ import annotations

SCHEMA_VERSION = 8

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

# 6: rows of a shared store: the lot a run measured, idempotent keys (a run's ``run_uid``,
# a capture's ``capture_id``, made before the write so that a retry finds its row), and
# the station folder (``origin``) a run was journalled from.
_V6 = """
ALTER TABLE runs ADD COLUMN lot TEXT;
ALTER TABLE runs ADD COLUMN run_uid TEXT;
ALTER TABLE runs ADD COLUMN origin TEXT;
ALTER TABLE measurements ADD COLUMN capture_id TEXT;
CREATE UNIQUE INDEX runs_run_uid ON runs(run_uid) WHERE run_uid IS NOT NULL;
CREATE UNIQUE INDEX measurements_capture_id ON measurements(capture_id)
    WHERE capture_id IS NOT NULL
"""

# 7: the outbox of a station that journals for a shared store: which rows changed since
# they were last forwarded, in order (filled by the forwarding connection's own triggers;
# empty for a station without a store).
_V7 = """
CREATE TABLE outbox (
    seq INTEGER PRIMARY KEY,
    tbl TEXT NOT NULL,
    row_id INTEGER NOT NULL
)
"""

# 8: the SHA-256 (hex) of a stored capture's Touchstone file and of its JSON summary,
# computed from the files as they landed, so that a copy or a shared folder can be checked.
_V8 = """
ALTER TABLE measurements ADD COLUMN touchstone_sha256 TEXT;
ALTER TABLE measurements ADD COLUMN summary_sha256 TEXT
"""

MIGRATIONS: dict[int, str] = {1: _V1, 2: _V2, 3: _V3, 4: _V4, 5: _V5, 6: _V6, 7: _V7,
                              8: _V8}
