"""When a cal set may be applied to a sweep, and finding the right one.

A calibration holds only for the settings it was made with. Refused: another frequency
grid (unless the plan allows interpolation and the sweep lies inside the calibrated band),
another instrument, a cal older than the plan's maximum age or dated in the future, and by
default another source power (signal path). Warned by default: another IF bandwidth or
averaging (they change noise, not the error terms). Every refusal is one line saying what
to do.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path
from typing import Any

from acquire.calibration.calset import CalSet, replace_grid
from acquire.calibration.calstore import list_calsets, same_instrument
from acquire.calibration.interpolate import MAX_STEP_DEG, interpolate_model
from acquire.errors import CalError
from acquire.units import format_duration, format_frequency
from drivers.stimulus import Stimulus

REFUSE, WARN = "refuse", "warn"
FUTURE_SLACK_S = 300.0  # clock differences below this are ignored (common practice)
log = logging.getLogger(__name__)


@dataclass(frozen=True)
class ValidityPolicy:
    """What a plan accepts; field names follow the plan's calibration section."""

    max_age_s: float | None = 8 * 3600.0
    power_mismatch: str = REFUSE
    if_bandwidth_mismatch: str = WARN
    averaging_mismatch: str = WARN
    allow_interpolation: bool = False
    max_step_deg: float = MAX_STEP_DEG

    def __post_init__(self) -> None:
        for name in ("power_mismatch", "if_bandwidth_mismatch", "averaging_mismatch"):
            if getattr(self, name) not in (REFUSE, WARN):
                raise ValueError(f"{name} must be 'refuse' or 'warn'")

    @classmethod
    def from_spec(cls, spec: Any) -> ValidityPolicy:
        """From a plan's calibration section (any object with the same field names)."""
        names = cls.__dataclass_fields__
        return cls(**{n: getattr(spec, n) for n in names if hasattr(spec, n)})


def check_validity(cal: CalSet, stimulus: Stimulus, instrument: str, *,
                   policy: ValidityPolicy = ValidityPolicy(), now: datetime | None = None,
                   plan_ref: str | None = None, grid: bool = True) -> list[str]:
    """Raise ``CalError`` if ``cal`` may not be used; return warnings otherwise.

    ``grid=False`` skips the grid comparison (the caller interpolates).
    """
    what = f"calibration {cal.when} for plan {cal.plan}"
    todo = f"run `sweepd calibrate {plan_ref or cal.plan}`"
    warnings: list[str] = []
    if not same_instrument(cal.instrument, instrument):
        raise CalError(f"{what} was made on instrument '{cal.instrument}', this one is "
                       f"'{instrument}': {todo}")
    if grid and not cal.stimulus.same_grid(stimulus):
        hint = ("" if policy.allow_interpolation
                else " (or allow interpolation in the plan's calibration section)")
        raise CalError(f"{what} was made on {_grid(cal.stimulus)}; this sweep is "
                       f"{_grid(stimulus)}: {todo}{hint}")
    for label, ours, theirs, rule, unit in (
        ("source power", cal.stimulus.power_dbm, stimulus.power_dbm, policy.power_mismatch,
         " dBm"),
        ("IF bandwidth", cal.stimulus.if_bandwidth_hz, stimulus.if_bandwidth_hz,
         policy.if_bandwidth_mismatch, ""),
        ("averaging", cal.stimulus.averaging, stimulus.averaging, policy.averaging_mismatch, ""),
    ):
        if ours == theirs:
            continue
        show = _show(label, ours, unit), _show(label, theirs, unit)
        if rule == REFUSE:
            raise CalError(f"{what} was made with {label} {show[0]}; this sweep uses {show[1]} "
                           f"(the plan refuses a change): {todo}")
        warnings.append(f"{what} was made with {label} {show[0]}; this sweep uses {show[1]}"
                        + (" (noise may differ)" if label != "source power" else ""))
    age = cal.age_s(now)
    if age < -FUTURE_SLACK_S:
        raise CalError(f"{what} is dated {format_duration(-age)} in the future: check the "
                       f"system clock, then {todo}")
    if policy.max_age_s is not None and age > policy.max_age_s:
        raise CalError(f"{what} is {format_duration(age)} old (max "
                       f"{format_duration(policy.max_age_s)}): {todo}")
    return warnings


def prepare(cal: CalSet, stimulus: Stimulus, instrument: str, *,
            policy: ValidityPolicy = ValidityPolicy(), now: datetime | None = None,
            plan_ref: str | None = None) -> tuple[CalSet, list[str]]:
    """The cal set to apply to sweeps with ``stimulus`` (interpolated if needed and
    allowed; then flagged), and the warnings to show."""
    if cal.stimulus.same_grid(stimulus) or not policy.allow_interpolation:
        return cal, check_validity(cal, stimulus, instrument, policy=policy, now=now,
                                   plan_ref=plan_ref)
    warnings = check_validity(cal, stimulus, instrument, policy=policy, now=now,
                              plan_ref=plan_ref, grid=False)
    try:
        model, report = interpolate_model(cal.model, stimulus.frequencies(),
                                          step_limit_deg=policy.max_step_deg)
    except CalError as exc:
        raise CalError(f"calibration {cal.when} for plan {cal.plan}: {exc}: run "
                       f"`sweepd calibrate {plan_ref or cal.plan}`") from None
    report = {"from": cal.id, **report}
    warnings.append(f"calibration {cal.when} was interpolated from {_grid(cal.stimulus)} to "
                    f"{_grid(stimulus)}")
    if report["coarse"]:
        warnings.append(f"calibration {cal.when}: error terms turn by up to "
                        f"{report['max_step_deg']:.0f}° per calibrated point (limit "
                        f"{policy.max_step_deg:g}°); the interpolated correction is coarse")
    return replace_grid(cal, model, report), warnings


def select(cal_dir: Path | str, plan: str, stimulus: Stimulus, instrument: str, *,
           policy: ValidityPolicy = ValidityPolicy(), now: datetime | None = None,
           plan_ref: str | None = None) -> tuple[CalSet, list[str]]:
    """The newest usable cal set for ``plan`` on ``instrument`` in ``cal_dir``.

    Raises the newest candidate's refusal when none is usable, or says that none exists.
    """
    first_error: CalError | None = None
    for path, _header in list_calsets(cal_dir, plan, instrument):
        try:
            return prepare(CalSet.load(path), stimulus, instrument, policy=policy, now=now,
                           plan_ref=plan_ref)
        except CalError as exc:
            log.info("not using %s: %s", path.name, exc)
            first_error = first_error or exc
    if first_error is not None:
        raise first_error
    raise CalError(f"no calibration for plan {plan} on instrument '{instrument}' in "
                   f"{cal_dir}: run `sweepd calibrate {plan_ref or plan}`")


def _grid(st: Stimulus) -> str:
    return (f"{format_frequency(st.start_hz)} to {format_frequency(st.stop_hz)}, "
            f"{st.points} points")


def _show(label: str, value: float, unit: str) -> str:
    if label == "IF bandwidth":
        return format_frequency(value)
    if label == "averaging":
        return "off" if value == 1 else f"{int(value)} sweeps"
    return f"{value:g}{unit}"
