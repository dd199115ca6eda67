"""The journal: schema versioning, pending-then-stored measurements, crash reconciliation,
one meaning per state."""

from __future__ import annotations

import json
import sqlite3
import threading
from pathlib import Path

import pytest

from acquire.errors import JournalError
from acquire.journal import StoredFields, journal_in, open_journal
from acquire.journal.sqlite_schema import SCHEMA_VERSION


def raw(folder: Path, sql: str, params: tuple = ()) -> list[sqlite3.Row]:
    """Read the file with a plain connection, as another program would."""
    db = sqlite3.connect(folder / "journal.sqlite")
    db.row_factory = sqlite3.Row
    try:
        return db.execute(sql, params).fetchall()
    finally:
        db.close()


def test_schema_created_in_wal_mode_with_user_version(tmp_path: Path) -> None:
    with journal_in(tmp_path) as j:
        assert j.schema_version == SCHEMA_VERSION
    assert raw(tmp_path, "PRAGMA journal_mode")[0][0] == "wal"
    assert raw(tmp_path, "PRAGMA user_version")[0][0] == SCHEMA_VERSION
    # older sweepd read the version from meta: it must see the newer one and refuse
    assert raw(tmp_path, "SELECT value FROM meta")[0][0] == str(SCHEMA_VERSION)
    with journal_in(tmp_path) as j:  # reopening an existing journal keeps it
        assert j.schema_version == SCHEMA_VERSION


def test_newer_schema_is_refused(tmp_path: Path) -> None:
    journal_in(tmp_path).close()
    db = sqlite3.connect(tmp_path / "journal.sqlite")
    db.execute("PRAGMA user_version = 99")
    db.close()
    with pytest.raises(JournalError, match="schema version 99 is newer"):
        journal_in(tmp_path)
    with pytest.raises(JournalError, match="schema version 99 is newer"):
        journal_in(tmp_path, read_only=True)


def test_not_a_database(tmp_path: Path) -> None:
    (tmp_path / "journal.sqlite").write_bytes(b"this is not sqlite" * 100)
    with pytest.raises(JournalError, match=r"journal .*journal\.sqlite"):
        journal_in(tmp_path)


def test_measurement_lifecycle_and_attempts(tmp_path: Path) -> None:
    with journal_in(tmp_path) as j:
        run = j.start_run("station", "patch-line-a", station="bench-3")
        p1 = j.plan_measurement(run, 0, tmp_path / "a.s1p", serial="PA-1")
        assert p1.attempt == 1
        j.store_measurement(p1, touchstone=tmp_path / "a.s1p", summary=None,
                            raw_touchstone=None,
                            fields=StoredFields(verdict="fail", exit_code=1, worst_margin=-0.2,
                                                metrics_json='{"S11": {"swr_min": 1.2}}'))
        p2 = j.plan_measurement(run, 1, tmp_path / "b.s1p", serial="PA-1")
        assert p2.attempt == 2  # a retest is recorded as such
        golden = j.plan_measurement(run, 2, tmp_path / "g.s1p", serial="GOLD", golden=True)
        assert golden.attempt == 1
        with pytest.raises(JournalError, match="already journalled"):
            j.plan_measurement(run, 1, tmp_path / "c.s1p", serial="PA-2")
        j.end_run(run)
        rows = j.run_measurements(run)
        assert [(r["seq"], r["state"], r["verdict"]) for r in rows] == [
            (0, "stored", "fail"), (1, "pending", None), (2, "pending", None)]
        assert j.run(run)["state"] == "finished"
        assert j.attempts("patch-line-a", "PA-1") == 1


def test_reconcile_adopts_complete_files_and_marks_the_rest_interrupted(tmp_path: Path) -> None:
    with journal_in(tmp_path) as j:
        run = j.start_run("soak", "drift")
        done = j.plan_measurement(run, 0, tmp_path / "s0.s1p")
        lost = j.plan_measurement(run, 1, tmp_path / "s1.s1p")
        (tmp_path / "s0.s1p").write_text("complete file")
        (tmp_path / "s1.json").write_text("{}")  # written ahead; its capture never landed
        (tmp_path / "s1.raw.s1p").write_text("raw")
        assert j.reconcile() == [(done.id, "stored"), (lost.id, "interrupted")]
        assert j.reconcile() == []
        assert sorted(p.name for p in tmp_path.iterdir()
                      if not p.name.startswith("journal")) == ["s0.s1p"]
        assert j.state_counts(run) == ({"stored": 1, "interrupted": 1}, 1)


def test_missed_means_due_but_never_taken_and_never_overwrites_a_row(tmp_path: Path) -> None:
    """One meaning for 'missed': a new row for an index that was due and not taken. An
    index already journalled (pending, stored, ...) keeps its row and state."""
    with journal_in(tmp_path) as j:
        run = j.start_run("soak", "drift")
        p = j.plan_measurement(run, 1, tmp_path / "s1.s1p")
        assert j.record_missed(run, range(0, 3), "instrument unreachable") == 2
        assert j.record_missed(run, [1, 2], "again") == 0
        rows = j.run_measurements(run)
        assert [(r["seq"], r["state"], r["note"]) for r in rows] == [
            (0, "missed", "instrument unreachable"), (1, "pending", None),
            (2, "missed", "instrument unreachable")]
        j.fail_measurement(p, "disk full")
        assert j.state_counts(run)[0] == {"missed": 2, "failed": 1}


def test_faults_alarms_and_golden_checks(tmp_path: Path) -> None:
    with journal_in(tmp_path) as j:
        run = j.start_run("soak", "drift")
        for n in range(3):
            j.record_fault(run, "ConnectionLost", f"link dropped {n}", action="reconnected",
                           seq=n)
        j.record_alarm(run, "resonance_hz", "drifted 2 MHz", seq=5, value=2e6, threshold=1e6)
        j.record_golden(run, "GOLD-1", True, worst_db=0.1)
        j.record_golden(run, "GOLD-1", False, worst_db=0.8, message="fixture moved")
        assert [f["message"] for f in j.faults(run)] == [f"link dropped {n}" for n in range(3)]
        assert [f["message"] for f in j.faults(run, last=1)] == ["link dropped 2"]
        assert j.alarms(run)[0]["value"] == 2e6
        assert j.last_golden("drift")["message"] == "fixture moved"
        assert j.last_good_golden_utc("drift") is not None
        assert [g["passed"] for g in j.golden_checks(plan="drift")] == [1, 0]
        assert j.golden_checks(plan="other") == []


def test_a_failed_write_rolls_back_and_says_which_journal(tmp_path: Path) -> None:
    with journal_in(tmp_path) as j:
        run = j.start_run("run", "p")
        with pytest.raises(ValueError, match="unknown run fields"):
            j.update_run(run, colour="red")
        with pytest.raises(JournalError, match=r"journal .*journal\.sqlite: .*already"):
            j.record_measured(run, 0, StoredFields())
            j.record_measured(run, 0, StoredFields())
        assert j.state_counts(run)[0] == {"measured": 1}


def test_read_only_view_cannot_write(tmp_path: Path) -> None:
    with journal_in(tmp_path) as j:
        run = j.start_run("soak", "drift")
    with journal_in(tmp_path, read_only=True) as view:
        assert view.run(run)["kind"] == "soak"
        with pytest.raises(JournalError, match="read-only"):
            view.record_fault(run, "k", "m")
    with pytest.raises(JournalError, match="not found"):
        journal_in(tmp_path / "nowhere", read_only=True)


def test_two_connections_share_the_file(tmp_path: Path) -> None:
    """Another process (here: another connection) reads while a writer writes (WAL)."""
    errors: list[BaseException] = []
    with journal_in(tmp_path) as writer:
        run = writer.start_run("soak", "drift")

        def write() -> None:
            try:
                for i in range(50):
                    writer.record_fault(run, "k", f"m{i}")
            except BaseException as exc:  # pragma: no cover - reported below
                errors.append(exc)

        t = threading.Thread(target=write)
        t.start()
        reader = open_journal(tmp_path / "journal.sqlite", read_only=True)
        while t.is_alive():
            reader.faults(run)
        t.join()
        assert len(reader.faults(run)) == 50
        reader.close()
    assert not errors


def test_adopted_rows_take_summary_verdict_and_raw_copy_from_their_files(tmp_path: Path) -> None:
    """Files are written summary, raw copy, Touchstone (last): an adopted capture's
    companions are complete and fill the row."""
    with journal_in(tmp_path) as j:
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
        (row,) = j.run_measurements(run)
        assert row["summary"] == str(tmp_path / "u.json")
        assert row["raw_touchstone"] == str(tmp_path / "u.raw.s1p")
        assert (row["verdict"], row["exit_code"], row["worst_margin"]) == ("fail", 1, -0.25)
        assert (row["cal_id"], row["cal_age_s"], row["instrument"]) == ("cal-1", 60.0,
                                                                        "maker,model,1,2")
        assert json.loads(row["metrics_json"]) == {"S11": {"swr_min": 1.3}}


@pytest.mark.parametrize("name", ["journal.sqlite", "journal.sqlite-wal"])
def test_a_journal_that_is_a_symbolic_link_is_refused(tmp_path: Path, name: str) -> None:
    target = tmp_path / "elsewhere"
    target.write_bytes(b"")
    (tmp_path / "out").mkdir()
    (tmp_path / "out" / name).symlink_to(target)
    for read_only in (False, True):
        with pytest.raises(JournalError, match=rf"{name} is a symbolic link") as info:
            journal_in(tmp_path / "out", read_only=read_only)
        assert "\n" not in str(info.value)
    assert target.read_bytes() == b""  # the target was not turned into a database


def test_run_refuses_a_journal_link_with_one_line(tmp_path: Path, capsys) -> None:
    from acquire.cli import main

    plan = tmp_path / "plan.yaml"
    plan.write_text("plan: p\ninstrument: {resource: 'TCPIP::127.0.0.1::1::SOCKET'}\n"
                    "stimulus: {start: 1 GHz, stop: 2 GHz, points: 11, power: -10 dBm, "
                    "if_bandwidth: 1 kHz}\n")
    (tmp_path / "out").mkdir()
    (tmp_path / "elsewhere").write_bytes(b"")
    (tmp_path / "out" / "journal.sqlite").symlink_to(tmp_path / "elsewhere")
    assert main(["run", str(plan), "--output", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "journal.sqlite is a symbolic link" in err
    assert (tmp_path / "elsewhere").read_bytes() == b""


def test_settling_covers_pending_rows_of_runs_that_ended(tmp_path: Path) -> None:
    """A run that ended (say failed on a full disk after its files were written) with a
    row still pending: the next start settles that row too; a live run keeps its own."""
    from acquire.journal.owner import RunOwner, settle_dead_runs

    with journal_in(tmp_path) as j:
        ended = j.start_run("run", "p")
        done = j.plan_measurement(ended, 0, tmp_path / "a.s1p")
        (tmp_path / "a.s1p").write_text("complete")
        j.end_run(ended, "failed", note="journal: the disk is full")
        with RunOwner(tmp_path) as owner:
            live = j.start_run("measure", "p", **owner.fields())
            busy = j.plan_measurement(live, 0, tmp_path / "b.s1p")
            assert settle_dead_runs(j, tmp_path) == (0, [(done.id, "stored")])
            assert j.run_measurements(live)[0]["state"] == "pending"
        assert settle_dead_runs(j, tmp_path) == (1, [(busy.id, "interrupted")])
