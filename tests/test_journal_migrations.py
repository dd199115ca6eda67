"""Journal schema migrations, tested on a journal written by an older sweepd, and the rule
that SQL lives only in the journal package.

``tests/data/journal-v1.sqlite`` was written by schema version 1 (see
``tests/data/journal-v1.md`` for how): a run, measure calls, a station shift with a failed
golden check, a plan without checks, a soak job and a killed run.
"""

from __future__ import annotations

import re
import shutil
import sqlite3
from pathlib import Path

import pytest

from acquire.journal import journal_in
from acquire.journal.sqlite_schema import MIGRATIONS, SCHEMA_VERSION
from acquire.journal.states import INTERRUPTED_NOTE, MEASUREMENT_STATES

ROOT = Path(__file__).resolve().parents[1]
V1 = Path(__file__).parent / "data" / "journal-v1.sqlite"


@pytest.fixture
def old(tmp_path: Path) -> Path:
    folder = tmp_path / "out"
    folder.mkdir()
    shutil.copyfile(V1, folder / "journal.sqlite")
    return folder


def _plain(folder: Path, sql: str) -> list[tuple]:
    db = sqlite3.connect(folder / "journal.sqlite")
    try:
        return db.execute(sql).fetchall()
    finally:
        db.close()


def test_the_fixture_is_a_version_1_journal(old: Path) -> None:
    assert _plain(old, "PRAGMA user_version") == [(0,)]
    assert _plain(old, "SELECT value FROM meta WHERE key = 'schema_version'") == [("1",)]


def test_a_version_1_journal_opens_migrated_and_reads_back(old: Path) -> None:
    with journal_in(old) as j:
        assert j.schema_version == SCHEMA_VERSION == max(MIGRATIONS)
        assert [j.run(n)["kind"] for n in range(1, 8)] == [
            "run", "measure", "measure", "station", "run", "soak", "run"]
        rows = j.measurements()
        assert len(rows) == 23
        assert {r["state"] for r in rows} <= set(MEASUREMENT_STATES)
        assert j.attempts("patch-station", "PA-0007") == 2
        assert j.last_golden("patch-station")["passed"] == 0
        assert [g["passed"] for g in j.golden_checks(plan="patch-station")] == [1, 1, 0]
        assert (j.run(6)["job_id"], j.run(6)["job_uid"]) == ("soak-test-001", None)
        assert j.soak_run("soak-test-001") is None  # resume never matches a short name
        assert j.state_counts(6) == ({"stored": 3, "measured": 9}, 11)
        assert len(j.alarms(6)) == 1
        assert [r["id"] for r in j.open_runs(("run", "measure"))] == [7]
        # the killed run's pending row: its file never landed
        assert [s for _, s in j.reconcile(run_id=7)] == ["interrupted"]
    assert _plain(old, "PRAGMA user_version") == [(SCHEMA_VERSION,)]
    assert _plain(old, "SELECT value FROM meta WHERE key = 'schema_version'") == [
        (str(SCHEMA_VERSION),)]


def test_summary_and_soak_history_read_a_migrated_journal(old: Path) -> None:
    from acquire.soak import history
    from acquire.station.summary import load_selection

    selection = load_selection(old)
    plans = {p.plan: p for p in selection.plans}
    assert set(plans) == {"patch-station", "patch-nochecks", "soak-test"}
    assert plans["patch-station"].golden_checks == 3
    with history.open_for_job(old) as view:  # read-only: upgraded first, then read
        series = history.series(view, 6)
    assert series.seq.tolist() == list(range(12))
    assert series.done_mask().all()


def test_a_job_from_before_job_uids_finds_its_run_through_its_state_file(
        old: Path, tmp_path: Path) -> None:
    from acquire.soak import history
    from acquire.soak.spool import Job

    def job(job_id: str, run_id: int) -> Job:
        folder = tmp_path / job_id
        folder.mkdir()
        legacy = Job(job_id, folder, "soak-test", tmp_path / "p.yaml", "", old, "r", "t", "u")
        legacy.write_state(state="running", run_id=run_id)
        return legacy

    with journal_in(old) as j:
        assert history.find_run(j, job("soak-test-001", 6))["id"] == 6
        assert history.find_run(j, job("soak-test-002", 6)) is None  # not its run
        assert history.find_run(j, job("patch-station-001", 1)) is None  # not a soak


def test_version_1_rows_settled_as_missed_after_a_crash_become_interrupted(old: Path) -> None:
    db = sqlite3.connect(old / "journal.sqlite")
    db.execute("UPDATE measurements SET state = 'missed', note = ? WHERE state = 'pending'",
               (INTERRUPTED_NOTE,))
    db.commit()
    db.close()
    with journal_in(old) as j:
        states = {r["serial"]: r["state"] for r in j.run_measurements(7)}
    assert states == {"PA-0009": "interrupted", "PA-0010": "missed"}


def test_a_failing_migration_leaves_the_file_as_it_was(old: Path, monkeypatch) -> None:
    import acquire.journal.sqlite_file as backend
    from acquire.errors import JournalError

    monkeypatch.setattr(backend, "MIGRATIONS", {**MIGRATIONS,
                                                SCHEMA_VERSION: "CREATE TABLE runs (x)"})
    with pytest.raises(JournalError, match="already exists"):
        journal_in(old)
    assert _plain(old, "PRAGMA user_version") == [(0,)]
    assert _plain(old, "SELECT value FROM meta") == [("1",)]


# -- SQL only in the journal package -------------------------------------------------------
SQL = re.compile(r"\bimport sqlite3\b|\bPRAGMA\b|\bCREATE (TABLE|INDEX)\b|"
                 r"\b(SELECT|INSERT|UPDATE|DELETE)\b[^\n]*\b(FROM|INTO|SET)\b")


def sql_outside_the_journal(root: Path) -> list[str]:
    found = []
    for folder in ("acquire", "drivers", "simulators", "bench"):
        for path in sorted((root / folder).rglob("*.py")):
            if (root / "acquire" / "journal") in path.parents:
                continue
            for n, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
                if SQL.search(line):
                    found.append(f"{path.relative_to(root)}:{n}: {line.strip()}")
    return found


def test_no_module_outside_the_journal_package_contains_sql() -> None:
    assert sql_outside_the_journal(ROOT) == []


def test_the_sql_rule_sees_sql(tmp_path: Path) -> None:
    (tmp_path / "acquire" / "journal").mkdir(parents=True)
    (tmp_path / "acquire" / "journal" / "x.py").write_text('Q = "SELECT a FROM b"\n')
    (tmp_path / "acquire" / "y.py").write_text('import sqlite3\nQ = "UPDATE runs SET a = 1"\n')
    assert [f.split(":")[1] for f in sql_outside_the_journal(tmp_path)] == ["1", "2"]
