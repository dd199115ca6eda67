"""The store keeps the SHA-256 of each stored capture's Touchstone file and JSON summary,
on both backends (SQLite file, shared PostgreSQL store through the station's outbox).
Reference: the digest of the files' bytes by Python's hashlib (FIPS 180-4 SHA-256)."""

from __future__ import annotations

import hashlib
from pathlib import Path

from test_station_support import install_cal, write_plan

from acquire.cli import main
from acquire.journal import journal_in, open_journal
from acquire.journal.hashes import file_sha256
from acquire.journal.settle import adopted_fields
from simulators.server import SimServer


def _sha256(path: str) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def _measure_two_units(tmp_path: Path, capsys) -> None:
    with SimServer(time_scale=0.0, noise=False) as sim:
        install_cal(tmp_path / "out")
        plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
        for serial in ("PA-0001", "PA-0002"):
            assert main(["measure", str(plan), "--serial", serial, "--json"]) in (0, 1)
    capsys.readouterr()


def _check_hashes(rows) -> None:
    stored = [r for r in rows if r["state"] == "stored"]
    assert len(stored) == 2
    for r in stored:
        assert r["touchstone_sha256"] == _sha256(r["touchstone"])
        assert r["summary_sha256"] == _sha256(r["summary"])
    assert stored[0]["touchstone_sha256"] != stored[1]["touchstone_sha256"]


def test_sqlite_journal_holds_the_hashes_of_the_files_written(tmp_path, capsys,
                                                             monkeypatch) -> None:
    monkeypatch.delenv("SWEEPD_JOURNAL", raising=False)
    _measure_two_units(tmp_path, capsys)
    with journal_in(tmp_path / "out", read_only=True) as j:
        _check_hashes(j.measurements())


def test_shared_store_holds_the_hashes_of_the_files_written(pg_url, tmp_path, capsys,
                                                           monkeypatch) -> None:
    monkeypatch.setenv("SWEEPD_JOURNAL", pg_url)
    _measure_two_units(tmp_path, capsys)
    with open_journal(pg_url, read_only=True) as store:
        rows = [r for r in store.measurements() if r["serial"] in ("PA-0001", "PA-0002")
                and r["touchstone"].startswith(str(tmp_path))]
    _check_hashes(rows)


def test_a_capture_adopted_after_a_crash_gets_its_hashes(tmp_path) -> None:
    touchstone = tmp_path / "u.s1p"
    touchstone.write_bytes(b"# Hz S RI R 50\n1e9 0.1 0.0\n")
    fields = adopted_fields(touchstone)
    assert fields["touchstone_sha256"] == _sha256(str(touchstone))
    assert fields["summary_sha256"] is None  # no summary landed
    with open_journal(tmp_path / "j.sqlite") as j:
        run = j.start_run("measure", "p")
        j.plan_measurement(run, 0, touchstone)
        j.reconcile()
        (row,) = j.run_measurements(run)
    assert row["state"] == "stored" and row["touchstone_sha256"] == fields["touchstone_sha256"]


def test_file_sha256_matches_a_published_check_value(tmp_path) -> None:
    # FIPS 180-4 example (NIST CSVM): SHA-256("abc")
    sample = tmp_path / "abc"
    sample.write_bytes(b"abc")
    assert file_sha256(sample) == (
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad")
    assert file_sha256(None) is None and file_sha256(tmp_path / "gone") is None
