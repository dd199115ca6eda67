"""Which cal set a measurement applies: the newest valid one for the plan and instrument,
where the plan's cal sets live, and the command that makes one."""

from __future__ import annotations

import logging
import shlex
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from acquire.calibration import CalSet, ValidityPolicy, select
from acquire.calibration.calset import SUFFIX
from acquire.capture.session import Session
from acquire.errors import CalError
from acquire.plan import Plan
from acquire.storage import safe_component

log = logging.getLogger(__name__)


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
