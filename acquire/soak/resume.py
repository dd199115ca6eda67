"""Resuming a soak job after an interruption: settle, adopt, and reload what came before.

On resume the run's pending rows are settled by their files (``reconcile``), stored rows
whose metrics were never written get them from their files (adopted), and the drift
series, the reference (for reference ``first``) and the last sweep are read back from
the journal, so the status and the Allan deviation go on where they stopped.
"""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from acquire.capture.records import worst_margin
from acquire.jsonclean import json_text
from acquire.soak import history
from acquire.soak.diskhold import Hold
from acquire.soak.drift import SweepDrift, make_reference, measure_drift
from acquire.utc import parse_utc

if TYPE_CHECKING:
    from acquire.soak.worker import SoakWorker

RESUME_GAP = "not taken: sweepd serve was not running"


def settle_interrupted(worker: SoakWorker) -> None:
    """Settle the run's sweeps in flight and journal the resumption."""
    journal = worker.journal
    assert journal is not None
    settled = journal.reconcile(run_id=worker.run_id)
    adopted = [mid for mid, new in settled if new == "stored"]
    worker.gap_reason = RESUME_GAP
    worker.journal_fault("restart", f"job resumed by sweepd serve (pid {os.getpid()}) "
                         f"after an interruption; {len(settled)} sweep(s) in flight "
                         f"settled ({len(adopted)} adopted from complete files)",
                         "resumed on its schedule")


def restore_counts(worker: SoakWorker) -> None:
    """Counters, the next index and a hold left open by a stop, from the journal."""
    journal = worker.journal
    assert journal is not None
    counts = history.counts(journal, worker.run_id)
    worker.tally = {**counts.by_state, "missed": counts.missed}
    worker.next_index = counts.next_seq
    held = history.open_hold(journal, worker.run_id)
    if held is None:
        return
    # stopped while held: the same hold goes on until space returns
    reason = str(held["reason"])
    worker.hold = Hold(int(held["first_seq"]), reason, int(held["id"]))
    worker.next_index = max(worker.next_index, worker.hold.first_seq)
    worker.state, worker.reason = "held", reason
    worker.job.write_state(state="held", reason=reason)


def restore_progress(worker: SoakWorker) -> None:
    """Reference, adopted rows' metrics and the drift series, from the journal."""
    journal = worker.journal
    assert journal is not None
    load_reference(worker)
    # stored rows without metrics: adopted now, or adopted by an earlier start that was
    # itself killed before it could fill them in
    unfilled = [r for r in journal.run_measurements(worker.run_id, ("stored",))
                if r["metrics_json"] is None]
    if unfilled:
        fill_adopted(worker, unfilled)
    load_series(worker)


def load_reference(worker: SoakWorker) -> None:
    """On resume with reference 'first': the first journalled sweep's file."""
    spec = worker.spec
    if spec.reference is not None:
        return  # read from its file at the first sweep (resampled onto the sweep grid)
    journal = worker.journal
    assert journal is not None
    rows = journal.run_measurements(worker.run_id, ("stored",), limit=1)
    if rows and rows[0]["touchstone"]:
        from acquire.touchstone import read_touchstone

        sweep = read_touchstone(rows[0]["touchstone"]).to_sweep()
        worker.reference = make_reference(sweep, spec.parameter, spec.band_hz,
                                          f"sweep {rows[0]['seq']}")


def fill_adopted(worker: SoakWorker, rows: list[dict[str, Any]]) -> None:
    """Metrics for sweeps whose files were complete but whose rows were not finished."""
    from acquire.checks import evaluate_checks
    from acquire.touchstone import read_touchstone

    journal = worker.journal
    assert journal is not None
    for row in rows:
        sweep = read_touchstone(row["touchstone"]).to_sweep()
        if worker.reference is None:
            load_reference(worker)
            if worker.reference is None:
                continue
        drift, delta_db, delta_deg = measure_drift(worker.reference, sweep)
        verdict = evaluate_checks(list(worker.plan.checks), sweep)
        t_s = parse_utc(row["time_utc"]).timestamp() - worker.timeline.start
        metrics = {**verdict.metrics, "soak": {**drift.to_dict(), "t_s": round(t_s, 6),
                                               "kept": ["adopted after a restart"]}}
        # files written before the kill are complete (atomic): the journal owns them too
        ts = Path(row["touchstone"])
        summary = ts.with_suffix(".json")
        raw = ts.with_name(f"{ts.stem}.raw{ts.suffix}")
        worker.deviation_file().append(int(row["seq"]), delta_db, delta_deg)  # before the row
        journal.fill_measurement(
            int(row["id"]), metrics_json=json_text(metrics),
            verdict=verdict.verdict if verdict.results else None,
            exit_code=verdict.exit_code if verdict.results else None,
            worst_margin=worst_margin(verdict),
            summary=str(summary) if summary.is_file() else None,
            raw_touchstone=str(raw) if raw.is_file() else None)


def load_series(worker: SoakWorker) -> None:
    """The drift so far, from the journal (after a restart)."""
    ser = history.series(worker.journal, worker.run_id)
    done = ser.done_mask()
    if not done.any():
        return
    start = worker.timeline.start
    for i in np.flatnonzero(done):
        entry = ser.soak[i]
        if entry:
            drift = SweepDrift(**{k: (entry.get(k) if entry.get(k) is not None else math.nan)
                                  for k in SweepDrift.__dataclass_fields__})
            worker.tracker.track(int(ser.seq[i]), drift, start + float(ser.t_s[i]))
    last = int(np.flatnonzero(done)[-1])
    worker.last_sweep = {"index": int(ser.seq[last]), "utc": None,
                         "verdict": ser.verdict[last], "kept": ser.state[last] == "stored"}
    worker.update_allan(int(ser.seq[last]), force=True)
