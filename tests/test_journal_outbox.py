"""The outbox: a station that loses the shared store keeps journalling into its own file
and forwards, in order, once the server is back: nothing lost, nothing twice. The server
is really stopped and restarted (tests/pg_cluster.py)."""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest

from acquire.journal import JOURNAL_NAME, StoredFields, open_journal, station_origin
from acquire.journal.outbox import OutboxJournal


def _unit(j: OutboxJournal, run: int, seq: int, folder: Path) -> None:
    """One capture as a station journals it: pending, file written, stored."""
    path = folder / f"u{seq}.s1p"
    planned = j.plan_measurement(run, seq, path, serial=f"PA-{seq:04d}")
    path.write_text(f"capture {seq}\n")
    j.store_measurement(planned, touchstone=path, summary=None, raw_touchstone=None,
                        fields=StoredFields(verdict="pass", exit_code=0))


def _server_rows(url: str) -> list[dict]:
    with open_journal(url, read_only=True) as store:
        return store.measurements()


@pytest.fixture
def restart(pg_cluster):
    """Stop the session's server for a test; it is running again afterwards."""
    yield pg_cluster
    pg_cluster.stop()
    pg_cluster.start()


def test_a_shift_goes_on_while_the_server_is_down(pg_url, restart, tmp_path) -> None:
    out = tmp_path / "out"
    j = OutboxJournal(out, pg_url, origin=station_origin(out), retry_s=0.0)
    run = j.start_run("station", "patch-line-a", station="st-1", lot="LOT-1")
    for seq in range(3):
        _unit(j, run, seq, out)
    assert j.backlog() == 0 and len(_server_rows(pg_url)) == 3

    restart.stop()
    for seq in range(3, 7):
        _unit(j, run, seq, out)  # the station keeps measuring
    j.record_fault(run, "StoreUnreachable", "results server down", seq=6)
    assert j.backlog() > 0 and "unreachable" in (j.last_error or "")
    assert j.state_counts(run) == ({"stored": 7}, 6)  # all in the station's own file

    restart.start()
    _unit(j, run, 7, out)  # the next write forwards the backlog first, in order
    assert j.backlog() == 0 and j.last_error is None
    j.end_run(run)
    j.close()
    rows = _server_rows(pg_url)
    assert [(r["seq"], r["state"], r["serial"]) for r in rows] == [
        (seq, "stored", f"PA-{seq:04d}") for seq in range(8)]
    with open_journal(pg_url, read_only=True) as store:
        (server_run,) = {r["run_id"] for r in rows}
        assert store.run(server_run)["state"] == "finished"
        faults = [(f["kind"], f["message"]) for f in store.faults(server_run)]
        assert [k for k, _ in faults] == ["StoreUnreachable", "StoreUnreachable",
                                          "StoreResumed"]  # the outage's own rows too
        assert faults[1][1] == "results server down"
    assert {r["touchstone"] for r in rows} == {str(p) for p in out.glob("*.s1p")}


def test_forwarding_again_after_a_lost_reply_adds_nothing(pg_url, tmp_path) -> None:
    """The server committed but the station never heard (its outbox still lists every
    change): forwarding everything again updates the same rows."""
    out = tmp_path / "out"
    with OutboxJournal(out, pg_url, origin=station_origin(out)) as j:
        run = j.start_run("station", "p", station="st-2")
        for seq in range(3):
            _unit(j, run, seq, out)
        j.record_golden(run, "GOLD-1", True, worst_db=0.1)
        j.record_fault(run, "k", "m")
        hold = j.start_hold(run, 3, "disk")
        j.end_hold(hold, 4)
    db = sqlite3.connect(out / JOURNAL_NAME)
    for table in ("runs", "measurements", "golden_checks", "faults", "holds"):
        db.execute(f"INSERT INTO outbox(tbl, row_id) SELECT '{table}', id FROM {table}")
    db.commit()
    db.close()
    with OutboxJournal(out, pg_url, origin=station_origin(out)) as j:
        assert j.backlog() > 0
        assert j.forward(force=True) and j.backlog() == 0
    with open_journal(pg_url, read_only=True) as store:
        rows = store.measurements()
        assert len(rows) == 3
        server_run = rows[0]["run_id"]
        assert len(store.golden_checks()) == 1 and len(store.faults(server_run)) == 1
        assert [(h["first_seq"], h["last_seq"]) for h in store.holds(server_run)] == [(3, 4)]


def test_runs_from_before_the_store_are_still_settled_at_the_station(pg_url, tmp_path) -> None:
    """A folder that journalled alone before it was pointed at a store: its crashed run
    (no origin) is the station's own and is settled at the next start."""
    from acquire.journal import journal_in
    from acquire.journal.owner import settle_dead_runs

    out = tmp_path / "out"
    with journal_in(out) as alone:
        crashed = alone.start_run("measure", "p")
        alone.plan_measurement(crashed, 0, out / "lost.s1p")
    with OutboxJournal(out, pg_url, origin=station_origin(out)) as j:
        runs, changed = settle_dead_runs(j, out)
        assert runs == 1 and [state for _, state in changed] == ["interrupted"]
        assert j.run(crashed)["state"] == "crashed"
    with open_journal(pg_url, read_only=True) as store:
        (row,) = store.measurements()
        assert row["state"] == "interrupted" and row["station"] is None


def test_an_outage_is_one_fault_row_and_one_line_each_way(pg_url, restart, tmp_path,
                                                          capsys) -> None:
    """Many failed attempts during one outage: one fault row in the station's own file and
    one stderr line when it starts, one of each when forwarding resumes (common practice
    for alarm logs: an edge, not a level)."""
    out = tmp_path / "out"
    j = OutboxJournal(out, pg_url, origin=station_origin(out), retry_s=0.0)
    run = j.start_run("station", "patch-line-a", station="st-1")
    _unit(j, run, 0, out)
    assert capsys.readouterr().err == ""

    restart.stop()
    for seq in range(1, 5):  # each write tries to forward (retry_s=0) and fails
        _unit(j, run, seq, out)
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 1 and err[0].startswith("sweepd: shared store postgresql://")
    assert "unreachable: " in err[0] and err[0].endswith("; journalling locally, will forward")
    assert [f["kind"] for f in j.faults(run)] == ["StoreUnreachable"]

    restart.start()
    _unit(j, run, 5, out)
    _unit(j, run, 6, out)
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 1 and "reachable again" in err[0]
    assert [f["kind"] for f in j.faults(run)] == ["StoreUnreachable", "StoreResumed"]
    assert j.backlog() == 0
    j.close()
    with open_journal(pg_url, read_only=True) as store:
        (server_run,) = [r for r in store.open_runs(["station"])
                         if r["origin"] == station_origin(out)]
        kinds = [f["kind"] for f in store.faults(server_run["id"])]
    assert kinds == ["StoreUnreachable", "StoreResumed"]  # forwarded with the rest


def test_a_station_that_starts_during_an_outage_says_so_once(pg_url, restart, tmp_path,
                                                             capsys) -> None:
    restart.stop()
    out = tmp_path / "out"
    j = OutboxJournal(out, pg_url, origin=station_origin(out), retry_s=0.0)
    run = j.start_run("station", "patch-line-a", station="st-2")
    for seq in range(3):
        _unit(j, run, seq, out)
    j.close()  # the last try at close is part of the same outage
    assert len(capsys.readouterr().err.splitlines()) == 1
    db = sqlite3.connect(out / JOURNAL_NAME)
    try:
        kinds = db.execute("SELECT kind FROM faults").fetchall()
    finally:
        db.close()
    assert kinds == [("StoreUnreachable",)]
