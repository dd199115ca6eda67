"""``sweepd run``: open, choose the cal set, sweep, judge, journal, store, report."""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from acquire.capture.calchoice import choose_calibration
from acquire.capture.files import Stored, plan_path
from acquire.capture.judge import Capture, capture
from acquire.capture.records import journalled_run, store_journalled
from acquire.capture.session import Session
from acquire.journal import journal_in
from acquire.plan import Plan
from acquire.storage import sweep_stale_temps


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


def run_plan(plan: Plan, out_dir: Path, *, resource: str | None = None,
             serial: str = "", kind: str = "run", operator: str | None = None,
             lot: str | None = None) -> RunResult:
    """The whole of ``sweepd run``: open, choose the cal set, sweep, judge, journal, store.

    The measurement is journalled as pending before its files are written and marked
    stored after; faults are journalled with the run marked failed.
    """
    sweep_stale_temps(out_dir)  # leftovers of a writer that was killed mid-write
    with journal_in(out_dir, location=plan.output.journal) as journal, journalled_run(
            journal, out_dir, kind, plan, fault_action="run stopped",
            resource=resource or plan.instrument.resource, operator=operator,
            lot=lot) as run:
        with Session(plan, resource) as session:
            journal.update_run(run.id, instrument=session.identity_text)
            cal = choose_calibration(plan, session)
            cap = capture(session, cal, serial)
        planned = journal.plan_measurement(
            run.id, 0, plan_path(cap, plan, out_dir, serial=serial), serial=serial
        )
        stored = store_journalled(journal, planned, cap, plan)
    return RunResult(cap, stored)
