"""What the journal keeps of a capture (``store_journalled``: written, then marked stored
or failed), and ``journalled_run``: a run started, its fault recorded and its end written,
the one way a command journals a run."""

from __future__ import annotations

import contextlib
import json
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

from acquire.capture.files import Stored, store
from acquire.capture.judge import Capture
from acquire.checks import Verdict
from acquire.errors import StorageError
from acquire.journal import JournalStore, Planned, StoredFields
from acquire.journal import worst_margin as journal_worst_margin
from acquire.journal.owner import RunOwner, settle_dead_runs
from acquire.plan import Plan
from drivers.errors import SweepdError


@dataclass
class RunRecord:
    """A journalled run in progress: its id, and how it is to end (``end``)."""

    journal: JournalStore
    id: int
    state: str = "finished"
    note: str | None = None

    def end(self, state: str, note: str | None = None) -> None:
        """End the run in ``state`` (default ``finished``) when the block exits."""
        self.state, self.note = state, note


@contextmanager
def journalled_run(journal: JournalStore, out_dir: Path, kind: str, plan: Plan, *,
                   fault_action: str, **fields: object) -> Iterator[RunRecord]:
    """Settle the runs of killed processes, then start a run owned by this process; on a
    ``SweepdError`` end it ``failed`` and journal the fault (``fault_action`` says what was
    done about it); on Ctrl-C end it ``stopped``; else end it as ``RunRecord.end`` said
    (``finished``). The error itself goes on to the caller."""
    with RunOwner(out_dir) as owner:
        settle_dead_runs(journal, out_dir)  # runs of killed processes: settled first
        run = RunRecord(journal, journal.start_run(
            kind, plan.name, plan_path=str(plan.source), **fields, **owner.fields()))
        try:
            yield run
        except SweepdError as exc:
            record_failure(journal, run.id, exc, fault_action)
            raise
        except KeyboardInterrupt:
            with contextlib.suppress(SweepdError):  # a full disk may refuse this too
                journal.end_run(run.id, "stopped", note="interrupted")
            raise
        journal.end_run(run.id, run.state, run.note)


def record_failure(journal: JournalStore, run_id: int, exc: BaseException,
                   action: str) -> None:
    """Journal the error that ended a run, as far as the journal still can (on a full
    disk it may not: the next start settles the run then)."""
    with contextlib.suppress(SweepdError):
        journal.end_run(run_id, "failed", note=str(exc))
        journal.record_fault(run_id, type(exc).__name__, str(exc), action=action)


def store_journalled(journal: JournalStore, planned: Planned, cap: Capture,
                     plan: Plan) -> Stored:
    """Write a planned capture and mark it stored; when its files cannot be written
    (disk full, permissions) nothing of it is left and the row is marked failed."""
    try:
        stored = store(cap, plan, planned.touchstone)
    except (OSError, SweepdError) as exc:
        reason = getattr(exc, "strerror", None) or str(exc)
        with contextlib.suppress(SweepdError):  # a full disk may refuse this too
            journal.fail_measurement(planned, f"not stored: {reason}")
        if isinstance(exc, SweepdError):
            raise
        raise StorageError(f"cannot store {planned.touchstone}: {reason}") from None
    journal_stored(journal, planned, cap, stored)
    return stored


def journal_stored(journal: JournalStore, planned: Planned, cap: Capture,
                   stored: Stored) -> None:
    """Mark a planned measurement stored with its verdict, metrics and calibration."""
    journal.store_measurement(planned, touchstone=stored.touchstone, summary=stored.summary,
                              raw_touchstone=stored.raw, fields=stored_fields(cap))


def stored_fields(cap: Capture, *, note: str | None = None,
                  with_verdict_json: bool = True) -> StoredFields:
    """What the journal keeps of a capture: verdict, margin, metrics, calibration."""
    meta = cap.sweep.meta
    verdict = cap.verdict
    return StoredFields(
        verdict=verdict.verdict if verdict.results else None,
        exit_code=verdict.exit_code if verdict.results else None,
        worst_margin=worst_margin(verdict),
        metrics_json=json.dumps(verdict.metrics),
        verdict_json=verdict.to_json(indent=None) if with_verdict_json else None,
        cal_id=meta.get("cal_id") if cap.corrected else None,
        cal_age_s=meta.get("cal_age_s") if cap.corrected else None,
        instrument=meta.get("instrument"),
        note=note,
    )


def worst_margin(verdict: Verdict) -> float | None:
    """The smallest margin over all mask segments (negative when failing), if any."""
    return journal_worst_margin(verdict.to_dict())
