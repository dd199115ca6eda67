"""One measurement, start to file: calibration chosen and applied, checks judged, saved.

``capture`` turns one sweep of an open ``Session`` into a ``Capture`` (raw and corrected
sweep plus verdict) without touching the disk; ``store`` writes it (Touchstone with the
verdict in its comments, optional raw file, JSON summary beside it). ``measure_and_save``
is the whole of ``sweepd run``; station and soak modes call the parts.
"""

from __future__ import annotations

import contextlib
import json
import logging
import shlex
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from acquire.checks import Verdict, evaluate_checks
from acquire.journal import JournalStore, Planned, StoredFields, journal_in
from acquire.journal import worst_margin as journal_worst_margin
from acquire.journal.owner import RunOwner, settle_dead_runs
from acquire.journal.settle import remove_orphans
from acquire.plan import Plan
from acquire.runner import Session, capture_path, save_capture
from acquire.storage import free_path, sweep_stale_temps, write_new
from acquire.sweep import Sweep
from acquire.utc import utc_now
from drivers.errors import SweepdError

log = logging.getLogger(__name__)

SUMMARY_FORMAT = "sweepd-capture"
SUMMARY_VERSION = 1


def cal_dir_for(plan: Plan) -> Path:
    """Where a plan's cal sets live: its ``calibration.dir``, else ``cal`` in the output
    folder the plan itself names. Both are taken from the plan's folder, and neither
    follows ``--output``: every run of a plan, from any working folder, finds its cal."""
    if plan.calibration is not None and plan.calibration.cal_dir is not None:
        return plan.calibration.cal_dir
    return plan.output.dir / "cal"


def calibrate_command(plan: Plan, resource: str | None = None) -> str:
    """The ``sweepd calibrate`` command that makes the cal set this run looks for, quoted
    for a POSIX shell and runnable from the current working folder."""
    words = ["sweepd", "calibrate", str(plan.source)]
    if resource and resource != plan.instrument.resource:
        words += ["--resource", resource]
    return shlex.join(words)


@dataclass
class CalChoice:
    """The cal set a run applies (or None) and what was said about it."""

    calset: Any | None = None
    warnings: list[str] = field(default_factory=list)


def choose_calibration(plan: Plan, session: Session) -> CalChoice:
    """The newest valid cal set for this plan and instrument, or a ``CalError`` saying why.

    A plan without a calibration section measures uncorrected; a plan whose calibration
    is marked ``required: false`` falls back to uncorrected data with a warning.
    """
    spec = plan.calibration
    if spec is None:
        return CalChoice()
    from acquire.calibration import ValidityPolicy, select
    from acquire.errors import CalError

    try:
        calset, warnings = select(
            cal_dir_for(plan), plan.name, session.applied, session.identity_text,
            policy=ValidityPolicy.from_spec(spec),
            plan_ref=calibrate_command(plan, session.resource).removeprefix("sweepd calibrate "),
        )
    except CalError as exc:
        if spec.required:
            raise
        return CalChoice(None, [f"measuring uncorrected: {exc}"])
    warnings = [*passed_over(cal_dir_for(plan), plan.name, calset), *warnings]
    for text in warnings:
        log.warning("%s", text)
    return CalChoice(calset, warnings)


def passed_over(cal_dir: Path, plan_name: str, chosen: Any) -> list[str]:
    """Say so when a newer cal set file of this plan could not be read and an older one
    is applied instead (a corrupt or truncated file must not be skipped quietly)."""
    from acquire.calibration import CalSet
    from acquire.calibration.calset import SUFFIX
    from acquire.errors import CalError
    from acquire.storage import safe_component

    source = chosen.interpolation["from"] if chosen.interpolation else chosen.id
    stamp = source.split("-", 1)[0]
    marker = f"-{safe_component(plan_name, max_len=40)}-"
    notes = []
    for path in sorted(cal_dir.glob(f"*{SUFFIX}"), reverse=True):
        if marker not in path.name or path.name.split("-", 1)[0] <= stamp:
            continue
        try:
            CalSet.load(path)
        except CalError as exc:
            notes.append(f"newer cal set {path.name} cannot be used ({exc}); applying the "
                         f"older {source} instead")
    return notes


@dataclass
class Capture:
    """One judged sweep, not yet stored."""

    raw: Sweep
    sweep: Sweep  # corrected when a cal set applied, else the raw sweep
    verdict: Verdict
    corrected: bool = False
    cal_warnings: list[str] = field(default_factory=list)
    uncertainty: Any = None  # acquire.uncertainty.SweepUncertainty


def capture(session: Session, cal: CalChoice, serial: str = "", **meta: Any) -> Capture:
    """Sweep once, correct with the chosen cal set, judge with the plan's checks."""
    raw = session.measure(serial, **meta)
    notes = {"cal_warnings": list(cal.warnings)} if cal.warnings else {}
    if cal.calset is not None:
        sweep = cal.calset.correct(raw).with_meta(corrected=True, **notes)
    else:
        sweep = raw.with_meta(corrected=False, **notes)
    unc = capture_uncertainty(session.plan, cal.calset, sweep)
    verdict = evaluate_checks(list(session.plan.checks), sweep, decision=session.plan.decision,
                              uncertainty=unc)
    return Capture(raw, sweep, verdict, cal.calset is not None, list(cal.warnings), unc)


def capture_uncertainty(plan: Plan, calset: Any | None, sweep: Sweep) -> Any:
    """The per-point uncertainty of a capture (acquire/uncertainty/capture.py)."""
    from acquire.uncertainty.capture import cached_kit, sweep_uncertainty, unavailable
    from acquire.uncertainty.decision import SIMPLE

    if calset is None or plan.calibration is None:
        return unavailable(sweep, "the sweep is uncorrected")
    return sweep_uncertainty(sweep, calset, cached_kit(plan.calibration.kit),
                             plan.decision or SIMPLE)


@dataclass
class Stored:
    """Where a capture went."""

    touchstone: Path
    summary: Path
    raw: Path | None = None


def store(cap: Capture, plan: Plan, path: Path) -> Stored:
    """Write the capture at ``path`` (which must be free, see ``plan_path``).

    Order matters for crash safety: the JSON summary first, then the raw copy (if the
    plan keeps raw data), then the Touchstone file with the verdict in its comments, each
    atomically. A Touchstone file that exists is therefore complete, and so is everything
    written before it (``JournalStore.reconcile`` relies on this).
    """
    raw_path = raw_path_for(path) if plan.output.keep_raw and cap.corrected else None
    summary = summary_dict(cap, path, raw_path)
    judged = plan.checks or cap.verdict.results  # a golden capture is judged without them
    comments = tuple(cap.verdict.comment_lines()) if judged else ()
    if cap.uncertainty is not None:
        comments += tuple(cap.uncertainty.comment_lines())
    try:
        summary_path = write_new(path.with_suffix(".json"),
                                 json.dumps(summary, indent=2, allow_nan=False) + "\n",
                                 unique=False)
        if raw_path is not None:
            save_capture(cap.raw.with_meta(raw_of=path.name), plan, raw_path, unique=False)
        final = save_capture(cap.sweep, plan, path, comments, unique=False)
    except BaseException:
        if not path.exists():  # no summary saying PASS for a capture that never landed
            remove_orphans(path)
        raise
    return Stored(final, summary_path, raw_path)


def raw_path_for(path: Path) -> Path:
    """Where the raw (uncorrected) copy of a capture goes: ``<stem>.raw.sNp``."""
    return path.with_name(f"{path.stem}.raw{path.suffix}")


def companions(path: Path) -> tuple[Path, ...]:
    """Every file a capture at ``path`` may write."""
    return (path, path.with_suffix(".json"), raw_path_for(path))


def plan_path(cap: Capture, plan: Plan, out_dir: Path, *, serial: str = "",
              index: int | None = None, station: str = "") -> Path:
    """A free Touchstone path for a capture, from the plan's name template."""
    verdict = cap.verdict.verdict if plan.checks or cap.verdict.results else ""
    path = capture_path(plan, out_dir, serial=serial, verdict=verdict, index=index,
                        station=station, when=utc_now())
    return free_path(path, companions)


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


def store_journalled(journal: JournalStore, planned: Planned, cap: Capture,
                     plan: Plan) -> Stored:
    """Write a planned capture and mark it stored; when its files cannot be written
    (disk full, permissions) nothing of it is left and the row is marked failed."""
    from acquire.errors import StorageError

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


def record_failure(journal: JournalStore, run_id: int, exc: BaseException,
                   action: str) -> None:
    """Journal the error that ended a run, as far as the journal still can (on a full
    disk it may not: the next start settles the run then)."""
    with contextlib.suppress(SweepdError):
        journal.end_run(run_id, "failed", note=str(exc))
        journal.record_fault(run_id, type(exc).__name__, str(exc), action=action)


def worst_margin(verdict: Verdict) -> float | None:
    """The smallest margin over all mask segments (negative when failing), if any."""
    return journal_worst_margin(verdict.to_dict())


def summary_dict(cap: Capture, touchstone: Path | None = None,
                 raw: Path | None = None) -> dict[str, Any]:
    """The verdict JSON plus a ``capture`` block (files, instrument, calibration)."""
    meta = cap.sweep.meta
    data = json.loads(cap.verdict.to_json())
    data["capture"] = {
        "format": SUMMARY_FORMAT,
        "version": SUMMARY_VERSION,
        "touchstone": str(touchstone) if touchstone else None,
        "raw_touchstone": str(raw) if raw else None,
        "plan": meta.get("plan"),
        "serial": meta.get("serial"),
        "instrument": meta.get("instrument"),
        "resource": meta.get("resource"),
        "started_utc": meta.get("started_utc"),
        "sweep_s": meta.get("sweep_s"),
        "calibration": {
            "id": meta.get("cal_id"),
            "method": meta.get("cal_method"),
            "age_s": meta.get("cal_age_s"),
            "interpolated": meta.get("cal_interpolated"),
            "warnings": list(cap.cal_warnings),
        } if cap.corrected else None,
        "warnings": list(cap.cal_warnings),
    }
    if cap.uncertainty is not None:
        data["uncertainty"] = json.loads(json.dumps(cap.uncertainty.to_dict(), allow_nan=False))
    return data


@dataclass
class RunResult:
    """What ``sweepd run`` reports."""

    capture: Capture
    stored: Stored

    @property
    def exit_code(self) -> int:
        return self.capture.verdict.exit_code if self.capture.verdict.results else 0

    def summary(self) -> dict[str, Any]:
        return json.loads(self.stored.summary.read_text())

    def one_line(self) -> str:
        sweep = self.capture.sweep
        cal = "uncorrected"
        if self.capture.corrected:
            cal = f"cal {sweep.meta.get('cal_id')} ({sweep.meta.get('cal_age_s', 0) / 3600:.1f} h)"
        lines = [f"{sweep.points} points in {sweep.meta.get('sweep_s', 0):.3f} s, {cal} -> "
                 f"{self.stored.touchstone}"]
        lines += [f"warning: {text}" for text in self.capture.cal_warnings]
        verdict = self.capture.verdict
        if verdict.results:
            lines += [verdict.summary_line(), verdict.metrics_line()]
        unc = self.capture.uncertainty
        if unc is not None and not unc.unavailable:
            lines += [text.removeprefix("sweepd ") for text in unc.comment_lines()
                      if text.startswith("sweepd ")]
        return "\n".join(lines)


def measure_and_save(plan: Plan, out_dir: Path, *, resource: str | None = None,
                     serial: str = "", kind: str = "run") -> RunResult:
    """The whole of ``sweepd run``: open, choose the cal set, sweep, judge, journal, store.

    The measurement is journalled as pending before its files are written and marked
    stored after; faults are journalled with the run marked failed.
    """
    sweep_stale_temps(out_dir)  # leftovers of a writer that was killed mid-write
    with journal_in(out_dir, location=plan.output.journal) as journal, \
            RunOwner(out_dir) as owner:
        settle_dead_runs(journal, out_dir)  # runs of killed processes: settled first
        run_id = journal.start_run(kind, plan.name, plan_path=str(plan.source),
                                   resource=resource or plan.instrument.resource,
                                   **owner.fields())
        try:
            with Session(plan, resource) as session:
                journal.update_run(run_id, instrument=session.identity_text)
                cal = choose_calibration(plan, session)
                cap = capture(session, cal, serial)
            planned = journal.plan_measurement(
                run_id, 0, plan_path(cap, plan, out_dir, serial=serial), serial=serial
            )
            stored = store_journalled(journal, planned, cap, plan)
        except SweepdError as exc:
            record_failure(journal, run_id, exc, "run stopped")
            raise
        journal.end_run(run_id)
    return RunResult(cap, stored)
