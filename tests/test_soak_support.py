"""Helpers shared by the soak tests: plans against a simulator, and the invariants that
must hold after any soak, however it was interrupted."""

from __future__ import annotations

import json
import sqlite3
from collections import Counter
from pathlib import Path
from typing import Any

import yaml

from acquire.soak.devfile import read_deviation
from acquire.soak.spool import Job, Spool
from acquire.storage import TEMP_PREFIX
from acquire.touchstone import read_touchstone

FINAL_STATES = {"stored", "measured", "missed", "interrupted", "failed"}


def soak_plan(path: Path, resource: str, out: Path, *, every: str = "0 s", count: int = 100,
              points: int = 101, timeout: str = "0.4 s", soak: dict | None = None,
              checks: bool = True, name: str = "soak-test") -> Path:
    data: dict[str, Any] = {
        "plan": name,
        "instrument": {"resource": resource, "timeout": timeout, "connect_timeout": "0.5 s"},
        "stimulus": {"start": "2.30 GHz", "stop": "2.60 GHz", "points": points,
                     "power": "-10 dBm", "if_bandwidth": "100 kHz"},
        "output": {"dir": str(out)},
        "schedule": {"every": every, "count": count},
        "soak": {"band": ["2.40 GHz", "2.50 GHz"], "keep": {"every": 10},
                 "faults": {"backoff_first": "0.05 s", "backoff_max": "0.4 s"},
                 **(soak or {})},
    }
    if checks:
        data["checks"] = [{"mask": "patch-2g45"}]
    path.write_text(yaml.safe_dump(data, sort_keys=False))
    return path


def submit(spool: Spool, plan: Path) -> Job:
    from acquire.plan import load_plan

    loaded = load_plan(plan)
    return spool.create_job(loaded.name, plan.resolve(), plan.read_text(),
                            loaded.output.dir.resolve(), loaded.instrument.resource)


def run_calibrated_soak(spool: Spool, sim: Any, plan: Path) -> Job:
    """Give ``plan`` a one-port calibration, calibrate on ``sim`` through its standard
    switch, then submit the soak and run it to the end in this thread."""
    import io

    from acquire.guided import Options, calibrate
    from acquire.plan import load_plan
    from acquire.soak.worker import SoakWorker, StopSignal

    data = yaml.safe_load(plan.read_text())
    data["calibration"] = {"method": "one-port", "kit": "generic-sma-50"}
    plan.write_text(yaml.safe_dump(data, sort_keys=False))
    calibrate(load_plan(plan), Options(resource=sim.tcp_resource, prompt="switch"),
              stdin=io.StringIO(), stdout=io.StringIO())
    sim.bench.connect("device")
    job = submit(spool, plan)
    assert SoakWorker(job, StopSignal()).run() == "finished"
    return job


def journal_rows(job: Job) -> tuple[list[sqlite3.Row], list[sqlite3.Row], list[sqlite3.Row]]:
    db = sqlite3.connect(job.output_dir / "journal.sqlite")
    db.row_factory = sqlite3.Row
    try:
        runs = db.execute("SELECT * FROM runs WHERE job_uid = ?", (job.uid,)).fetchall()
        assert len(runs) == 1, f"one run per job, found {len(runs)}"
        rows = db.execute("SELECT * FROM measurements WHERE run_id = ? ORDER BY seq",
                          (runs[0]["id"],)).fetchall()
        faults = db.execute("SELECT * FROM faults WHERE run_id = ? ORDER BY id",
                            (runs[0]["id"],)).fetchall()
    finally:
        db.close()
    return runs, rows, faults


def holds(job: Job) -> list[sqlite3.Row]:
    """The job's holds for disk space (each one row for a span of sweeps not taken)."""
    db = sqlite3.connect(job.output_dir / "journal.sqlite")
    db.row_factory = sqlite3.Row
    try:
        return db.execute("SELECT h.* FROM holds h JOIN runs r ON r.id = h.run_id "
                          "WHERE r.job_uid = ? ORDER BY h.id", (job.uid,)).fetchall()
    finally:
        db.close()


def check_invariants(job: Job, planned: int) -> Counter:
    """Every index 0..planned-1 once, in a final state or in a closed hold; files and
    journal agree; nothing half-written; every taken sweep has its drift record. Returns
    the states counted (sweeps of holds as 'held')."""
    _, rows, _ = journal_rows(job)
    spans = [range(h["first_seq"], h["last_seq"] + 1) for h in holds(job)]
    held = [seq for span in spans for seq in span]
    assert sorted([r["seq"] for r in rows] + held) == list(range(planned)), \
        "indices: gap or extra"
    states = Counter(r["state"] for r in rows)
    assert set(states) <= FINAL_STATES, states
    if held:
        states["held"] = len(held)
    referenced: set[Path] = set()
    for r in rows:
        if r["state"] == "stored":
            ts = Path(r["touchstone"])
            assert ts.is_file(), ts
            sweep = read_touchstone(ts).to_sweep()  # complete and parseable
            assert sweep.points > 0
            referenced.add(ts)
            if r["raw_touchstone"]:
                referenced.add(Path(r["raw_touchstone"]))
            if r["summary"]:
                summary = Path(r["summary"])
                json.loads(summary.read_text())
                referenced.add(summary)
            metrics = json.loads(r["metrics_json"])
            assert "soak" in metrics, r["seq"]
        elif r["state"] == "measured":
            assert r["touchstone"] is None
            assert "soak" in json.loads(r["metrics_json"])
        elif r["state"] in ("missed", "interrupted"):
            assert r["note"], r["seq"]
    folder = job.data_dir
    leftovers = [p for p in folder.rglob("*") if p.name.startswith(TEMP_PREFIX)]
    assert not leftovers, leftovers
    captures = {p for p in folder.iterdir()
                if p.suffix in (".json", ".s1p", ".s2p", ".ts")}
    assert captures == referenced, (captures ^ referenced)
    done = {r["seq"] for r in rows if r["state"] in ("stored", "measured")}
    deviation = read_deviation(folder, done)
    got = set() if deviation is None else set(deviation[1].tolist())
    assert got == done, f"drift records missing for {sorted(done - got)[:10]}"
    return states


def status_counts(job: Job) -> dict[str, int]:
    from acquire.soak.spool import Spool
    from acquire.soak.status import spool_view

    spool = Spool(job.dir.parent.parent)
    view = spool_view(spool, [job])
    return view["jobs"][0]["sweeps"]
