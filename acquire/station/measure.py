"""One unit measured non-interactively (``sweepd measure``, for MES calls).

Same serial check, calibration rules, checks, files and journal as the station; a plan
with a golden unit refuses to measure while the line is stopped or a golden check is due
(``--golden`` measures the golden unit instead). The JSON result has one fixed layout for
every outcome, errors included (``RESULT_KEYS``; see README "sweepd measure").
"""

from __future__ import annotations

import contextlib
import shlex
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from acquire.capture.calchoice import choose_calibration
from acquire.capture.records import journalled_run
from acquire.capture.session import Session
from acquire.journal import journal_in
from acquire.journal.labels import check_lot, check_operator
from acquire.plan import Plan
from acquire.station.config import check_station_id, station_config
from acquire.station.errors import LineStopped, StationError
from acquire.station.golden import load_reference
from acquire.station.schedule import line_state
from acquire.station.serials import check_serial
from acquire.station.unit import Line, UnitResult, measure_unit

RESULT_FORMAT = "sweepd-measure"
RESULT_VERSION = 1
RESULT_KEYS = (
    "format", "version", "plan", "serial", "station", "golden", "verdict", "exit_code",
    "attempt", "retest", "time_utc", "worst_margin", "key_figures", "checks", "golden_check",
    "files", "calibration", "instrument", "resource", "journal", "warnings", "error",
)


@dataclass(frozen=True)
class Request:
    serial: str | None = None
    golden: bool = False
    resource: str | None = None
    out_dir: Path | None = None
    station_id: str | None = None
    operator: str | None = None
    lot: str | None = None


@dataclass
class Outcome:
    result: UnitResult
    journal_path: Path
    run_id: int
    resource: str

    @property
    def exit_code(self) -> int:
        if self.result.golden_result is not None:
            return 0 if self.result.golden_result.passed else 1
        return self.result.exit_code


def measure_one(plan: Plan, request: Request, session: Session | None = None) -> Outcome:
    """Measure one unit (or the golden unit); ``SweepdError`` with one line on failure.

    ``session`` is an open ``Session`` for this plan on the request's instrument (the
    measurement service keeps one open between calls); without it one is opened and
    closed here.
    """
    config = station_config(plan)
    golden = config.golden
    serial = unit_serial(plan, request)
    station_id = request.station_id or config.station_id or ""
    if station_id:
        check_station_id(station_id)
    check_operator(request.operator)
    check_lot(request.lot)
    reference = load_reference(golden, plan) if golden is not None else None
    out_dir = request.out_dir or plan.output.dir
    resource = request.resource or plan.instrument.resource
    with journal_in(out_dir, location=plan.output.journal) as journal, journalled_run(
            journal, out_dir, "measure", plan, fault_action="not measured",
            station=station_id or None, resource=resource, operator=request.operator,
            lot=request.lot) as run, \
            _opened(session, plan, resource) as session:
        journal.update_run(run.id, instrument=session.identity_text)
        cal = choose_calibration(plan, session)
        line = Line(plan, config, out_dir, journal, run.id, station_id, session, cal,
                    reference)
        if golden is not None and not request.golden:
            _check_line_open(journal, plan, golden, cal, request)
        result = measure_unit(line, serial, golden=request.golden)
    return Outcome(result, Path(journal.where), run.id, resource)


def _opened(session: Session | None, plan: Plan,
            resource: str) -> contextlib.AbstractContextManager[Session]:
    """The caller's open session (left open), or a new one opened and closed here."""
    return contextlib.nullcontext(session) if session is not None else Session(plan, resource)


def unit_serial(plan: Plan, request: Request) -> str:
    """The serial to measure: the request's, checked against the plan's rule, or the
    golden unit's; ``StationError`` saying why not (before any instrument is touched)."""
    config = station_config(plan)
    golden = config.golden
    if request.golden:
        if golden is None:
            raise StationError(f"plan {plan.source}: --golden needs station.golden in the plan")
        return golden.serial
    if not request.serial:
        raise StationError("measure: give --serial SERIAL (or --golden)")
    serial = check_serial(request.serial, config.serial)
    if golden is not None and serial == golden.serial:
        raise StationError(f"serial {serial} is the golden unit's: use --golden")
    return serial


def _check_line_open(journal: Any, plan: Plan, golden: Any, cal: Any,
                     request: Request) -> None:
    """``LineStopped`` while the line is stopped or a golden check is due."""
    created = cal.calset.created if cal.calset is not None else None
    state = line_state(journal, plan.name, golden, cal_created=created)
    golden_run = golden_command(plan, request)
    if state.stopped:
        raise LineStopped(f"line stopped: {state.stop_reason}; recalibrate or "
                          f"pass a golden re-check: run `{golden_run}`")
    if state.due:
        raise LineStopped(f"golden check due: {state.due_reason}; run `{golden_run}` first")


def golden_command(plan: Plan, request: Request) -> str:
    """The ``sweepd measure --golden`` call that clears the line for this request: same
    plan, instrument, output folder and station, quoted for a POSIX shell."""
    words = ["sweepd", "measure", str(plan.source), "--golden"]
    for flag, value in (("--resource", request.resource), ("--output", request.out_dir),
                        ("--station", request.station_id)):
        if value:
            words += [flag, str(value)]
    return shlex.join(words)


def result_dict(outcome: Outcome | None, *, plan: str | None = None, serial: str | None = None,
                error: str | None = None) -> dict[str, Any]:
    """The JSON result (``RESULT_KEYS``, always all of them; null where unknown)."""
    data: dict[str, Any] = dict.fromkeys(RESULT_KEYS)
    data.update(format=RESULT_FORMAT, version=RESULT_VERSION, plan=plan, serial=serial,
                golden=False, exit_code=2, retest=False, checks=[], warnings=[], error=error)
    if outcome is None:
        return data
    r = outcome.result
    cap = r.capture
    meta = cap.sweep.meta
    verdict = cap.verdict.verdict
    golden = r.golden_result
    data.update(
        plan=meta.get("plan"), serial=r.serial, station=meta.get("station"),
        golden=r.golden, verdict=("pass" if golden.passed else "fail") if golden else verdict,
        exit_code=outcome.exit_code, attempt=r.attempt, retest=r.attempt > 1 and not r.golden,
        time_utc=meta.get("started_utc"), worst_margin=r.figures.worst_margin,
        key_figures=cap.verdict.metrics.get("key_figures"),
        checks=[{"kind": c.kind, "name": c.name, "verdict": c.verdict, "summary": c.summary}
                for c in cap.verdict.results],
        golden_check=golden.to_dict() if golden else None,
        files={"touchstone": str(r.stored.touchstone), "summary": str(r.stored.summary),
               "raw_touchstone": str(r.stored.raw) if r.stored.raw else None},
        calibration=({"id": meta.get("cal_id"), "age_s": meta.get("cal_age_s"),
                      "method": meta.get("cal_method")} if cap.corrected else None),
        instrument=meta.get("instrument"), resource=outcome.resource,
        journal={"path": str(outcome.journal_path), "run_id": outcome.run_id,
                 "measurement_id": r.planned.id},
        warnings=list(cap.cal_warnings),
    )
    return data


def result_line(outcome: Outcome) -> str:
    """The human answer: verdict, serial, worst margin, key figures, file."""
    r = outcome.result
    if r.golden_result is not None:
        head = r.golden_result.message
    else:
        retest = f" (retest, attempt {r.attempt})" if r.attempt > 1 else ""
        margin = (f", worst margin {r.figures.worst_margin:+.4g}"
                  if r.figures.worst_margin is not None else "")
        head = f"{r.verdict.upper()} {r.serial}{retest}{margin}"
    return "\n".join([head, r.figures.line(), f"file {r.stored.touchstone}"])
