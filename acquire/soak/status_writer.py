"""The status file of a running soak job: what it holds, and how often it is rewritten.

The layout is the one ``sweepd status --json`` shows per job (see ``acquire.soak.status``).
Writes are throttled to one per ``STATUS_EVERY_S`` unless forced; a failed write is
logged and never stops the sweeps (the journal holds everything).
"""

from __future__ import annotations

import logging
import math
import os
from typing import TYPE_CHECKING, Any

from acquire.journal import JOURNAL_NAME
from acquire.jsonclean import json_safe
from acquire.soak import history
from acquire.utc import epoch_text, utc_text

if TYPE_CHECKING:
    from acquire.soak.worker import SoakWorker

log = logging.getLogger(__name__)

STATUS_EVERY_S = 0.5  # the status file is rewritten at most this often while sweeping


class StatusWriter:
    """Rewrites one worker's status file, at most every ``STATUS_EVERY_S`` unless forced."""

    def __init__(self, worker: SoakWorker) -> None:
        self.worker = worker
        self._written_at = -math.inf

    def write(self, now: float, force: bool = False) -> None:
        if not force and now - self._written_at < STATUS_EVERY_S:
            return
        self._written_at = now
        worker = self.worker
        if worker.devfile is not None:
            worker.devfile.sync()
        try:
            worker.job.write_status(status_document(worker, now))
        except OSError as exc:  # a full disk must not stop the sweeps: the journal has all
            log.warning("job %s: status file not written: %s", worker.job.id, exc)


def done_count(tally: dict[str, int]) -> int:
    """Sweeps taken (journalled in a done state)."""
    return sum(tally.get(s, 0) for s in history.DONE_STATES)


def status_document(worker: SoakWorker, now: float) -> dict[str, Any]:
    """The status file's content for ``worker`` at epoch ``now`` (JSON-safe)."""
    schedule, timeline, tally = worker.spec.schedule, worker.timeline, worker.tally
    k = worker.next_index
    in_plan = worker.state == "running" and timeline.in_plan(k, now) and worker.reason is None
    done = done_count(tally)
    return json_safe({
        "job": worker.job.id,
        "state": worker.state,
        "reason": worker.reason,
        "run_id": worker.run_id,
        "pid": os.getpid(),
        "updated_utc": utc_text(),
        "schedule": {"every_s": schedule.every_s, "count": schedule.count,
                     "duration_s": schedule.duration_s, "planned": schedule.total(),
                     "start_utc": epoch_text(timeline.start),
                     "end_utc": epoch_text(timeline.end_time())},
        "sweeps": {"done": done, "kept": tally.get("stored", 0),
                   "missed": tally.get("missed", 0), "failed": tally.get("failed", 0),
                   "interrupted": tally.get("interrupted", 0)},
        "last_sweep": worker.last_sweep,
        "last_fault": worker.last_fault,
        "next_sweep": {"index": k, "due_utc": epoch_text(max(timeline.due(k), now))}
        if in_plan else None,
        "eta_utc": epoch_text(_eta(worker, now)),
        "drift": _drift_section(worker),
        "alarms": {"count": worker.alarm_log.count, "active": sorted(worker.alarms.active),
                   "last": worker.alarm_log.last},
        "files": {"data_dir": str(worker.job.data_dir),
                  "journal": str(worker.job.output_dir / JOURNAL_NAME)},
    })


def _drift_section(worker: SoakWorker) -> dict[str, Any]:
    tracker = worker.tracker
    return {
        "reference": worker.reference.source if worker.reference else None,
        "parameter": worker.spec.parameter,
        "latest": tracker.latest.to_dict() if tracker.latest else None,
        "worst": dict(tracker.worst),
        "allan_resonance": [p.to_dict() for p in tracker.allan],
        "statistics": tracker.stats_note or "ready",
    }


def _eta(worker: SoakWorker, now: float) -> float | None:
    end = worker.timeline.end_time()
    if end is not None:
        return max(end, now)
    total = worker.spec.schedule.total()
    if total is None or worker.timeline.every > 0:
        return None
    period = worker.tracker.mean_period()
    if period is None:
        return None
    return now + max(0, total - worker.next_index) * period


def tally_text(tally: dict[str, int]) -> str:
    """One line for the log: sweeps done, kept, missed, failed."""
    return (f"{done_count(tally)} sweeps, {tally.get('stored', 0)} kept, "
            f"{tally.get('missed', 0)} missed, {tally.get('failed', 0)} failed")
