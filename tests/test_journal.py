"""The journal: schema versioning, pending-then-stored measurements, crash reconciliation."""

from __future__ import annotations

import sqlite3
import threading
from pathlib import Path

import pytest

from acquire.errors import JournalError
from acquire.journal import SCHEMA_VERSION, Journal


def test_schema_created_in_wal_mode(tmp_path: Path) -> None:
    with Journal.in_folder(tmp_path) as j:
        assert j.schema_version == SCHEMA_VERSION
        assert j.query_one("PRAGMA journal_mode")[0] == "wal"
    # reopening an existing journal keeps it
    with Journal.in_folder(tmp_path) as j:
        assert j.schema_version == SCHEMA_VERSION


def test_newer_schema_is_refused(tmp_path: Path) -> None:
    with Journal.in_folder(tmp_path) as j, j.transaction() as db:
        db.execute("UPDATE meta SET value = '99' WHERE key = 'schema_version'")
    with pytest.raises(JournalError, match="schema version 99 is newer"):
        Journal.in_folder(tmp_path)


def test_not_a_database(tmp_path: Path) -> None:
    (tmp_path / "journal.sqlite").write_bytes(b"this is not sqlite" * 100)
    with pytest.raises(JournalError, match=r"journal .*journal\.sqlite"):
        Journal.in_folder(tmp_path)


def test_measurement_lifecycle_and_attempts(tmp_path: Path) -> None:
    with Journal.in_folder(tmp_path) as j:
        run = j.start_run("station", "patch-line-a", station="bench-3")
        p1 = j.plan_measurement(run, 0, tmp_path / "a.s1p", serial="PA-1")
        assert p1.attempt == 1
        j.store_measurement(p1, touchstone=tmp_path / "a.s1p", summary=None, verdict="fail",
                            exit_code=1, worst_margin=-0.2, metrics={"S11": {"swr_min": 1.2}})
        p2 = j.plan_measurement(run, 1, tmp_path / "b.s1p", serial="PA-1")
        assert p2.attempt == 2  # a retest is recorded as such
        golden = j.plan_measurement(run, 2, tmp_path / "g.s1p", serial="GOLD", golden=True)
        assert golden.attempt == 1
        with pytest.raises(JournalError, match="already journalled"):
            j.plan_measurement(run, 1, tmp_path / "c.s1p", serial="PA-2")
        j.end_run(run)
        rows = j.query("SELECT seq, state, verdict FROM measurements ORDER BY seq")
        assert [tuple(r) for r in rows] == [(0, "stored", "fail"), (1, "pending", None),
                                            (2, "pending", None)]
        assert j.query_one("SELECT state FROM runs")[0] == "finished"


def test_reconcile_adopts_complete_files_and_marks_the_rest_missed(tmp_path: Path) -> None:
    with Journal.in_folder(tmp_path) as j:
        run = j.start_run("soak", "drift")
        done = j.plan_measurement(run, 0, tmp_path / "s0.s1p")
        lost = j.plan_measurement(run, 1, tmp_path / "s1.s1p")
        (tmp_path / "s0.s1p").write_text("complete file")
        (tmp_path / "s1.json").write_text("{}")  # written ahead; its capture never landed
        (tmp_path / "s1.raw.s1p").write_text("raw")
        assert j.reconcile() == [(done.id, "stored"), (lost.id, "missed")]
        assert j.reconcile() == []
        assert sorted(p.name for p in tmp_path.iterdir()
                      if not p.name.startswith("journal")) == ["s0.s1p"]


def test_missed_sweeps_and_faults(tmp_path: Path) -> None:
    with Journal.in_folder(tmp_path) as j:
        run = j.start_run("soak", "drift")
        j.record_missed(run, 5, "instrument unreachable")
        j.record_fault(run, "ConnectionLost", "link dropped", action="reconnected", seq=5)
        j.record_alarm(run, "resonance_hz", "drifted 2 MHz", seq=5, value=2e6, threshold=1e6)
        j.record_golden(run, "GOLD-1", False, worst_db=0.8, message="fixture moved")
        assert j.query_one("SELECT state, note FROM measurements")[:] == (
            "missed", "instrument unreachable")
        assert j.query_one("SELECT COUNT(*) FROM faults")[0] == 1
        assert j.query_one("SELECT COUNT(*) FROM alarms")[0] == 1
        assert j.query_one("SELECT passed FROM golden_checks")[0] == 0


def test_transaction_rolls_back(tmp_path: Path) -> None:
    with Journal.in_folder(tmp_path) as j:
        with pytest.raises(RuntimeError), j.transaction() as db:
            db.execute("INSERT INTO faults(time_utc, kind, message) VALUES ('t', 'k', 'm')")
            raise RuntimeError("boom")
        assert j.query_one("SELECT COUNT(*) FROM faults")[0] == 0


def test_two_connections_share_the_file(tmp_path: Path) -> None:
    """Another process (here: another connection) reads while a writer writes (WAL)."""
    errors: list[BaseException] = []
    with Journal.in_folder(tmp_path) as writer:
        run = writer.start_run("soak", "drift")

        def write() -> None:
            try:
                for i in range(50):
                    writer.record_fault(run, "k", f"m{i}")
            except BaseException as exc:  # pragma: no cover - reported below
                errors.append(exc)

        t = threading.Thread(target=write)
        t.start()
        reader = sqlite3.connect(tmp_path / "journal.sqlite", timeout=10)
        while t.is_alive():
            reader.execute("SELECT COUNT(*) FROM faults").fetchone()
        t.join()
        assert reader.execute("SELECT COUNT(*) FROM faults").fetchone()[0] == 50
        reader.close()
    assert not errors


def test_adopted_rows_take_summary_verdict_and_raw_copy_from_their_files(tmp_path: Path) -> None:
    """Files are written summary, raw copy, Touchstone (last): an adopted capture's
    companions are complete and fill the row."""
    import json

    with Journal.in_folder(tmp_path) as j:
        run = j.start_run("station", "patch-line-a")
        p = j.plan_measurement(run, 0, tmp_path / "u.s1p", serial="PA-1")
        summary = {
            "verdict": "fail", "exit_code": 1, "metrics": {"S11": {"swr_min": 1.3}},
            "checks": [{"kind": "mask", "segments": [{"worst": {"margin": -0.25}},
                                                     {"worst": {"margin": 0.5}}]}],
            "capture": {"instrument": "maker,model,1,2",
                        "calibration": {"id": "cal-1", "age_s": 60.0}},
        }
        (tmp_path / "u.json").write_text(json.dumps(summary))
        (tmp_path / "u.raw.s1p").write_text("raw")
        (tmp_path / "u.s1p").write_text("corrected")
        assert j.reconcile() == [(p.id, "stored")]
        row = j.query_one("SELECT * FROM measurements")
        assert row["summary"] == str(tmp_path / "u.json")
        assert row["raw_touchstone"] == str(tmp_path / "u.raw.s1p")
        assert (row["verdict"], row["exit_code"], row["worst_margin"]) == ("fail", 1, -0.25)
        assert (row["cal_id"], row["cal_age_s"], row["instrument"]) == ("cal-1", 60.0,
                                                                        "maker,model,1,2")
        assert json.loads(row["metrics_json"]) == {"S11": {"swr_min": 1.3}}
