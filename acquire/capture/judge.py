"""One sweep corrected and judged: a ``Capture`` (raw and corrected sweep, verdict,
uncertainty), with nothing written yet."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from acquire.capture.calchoice import CalChoice
from acquire.capture.session import Session
from acquire.checks import Verdict, evaluate_checks
from acquire.plan import Plan
from acquire.sweep import Sweep
from acquire.uncertainty.capture import cached_kit, sweep_uncertainty, unavailable
from acquire.uncertainty.decision import SIMPLE


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
    if calset is None or plan.calibration is None:
        return unavailable(sweep, "the sweep is uncorrected")
    return sweep_uncertainty(sweep, calset, cached_kit(plan.calibration.kit),
                             plan.decision or SIMPLE)
