"""Is the line stopped, and is a golden check due? Read from the journal, so the answer
is the same for every station process and ``sweepd measure`` sharing an output folder,
and survives restarts.

- Stopped: the latest golden check of the plan failed, and no cal set made after it is
  in use (a recalibration releases the line; so does a good re-check).
- Due: never checked; or ``every_units`` units stored since the last good check (or the
  recalibration that released the line); or ``every`` seconds passed since then.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

from acquire.journal import JournalStore
from acquire.station.golden import GoldenSpec
from acquire.units import format_duration
from acquire.utc import parse_utc, utc_now, utc_text


@dataclass(frozen=True)
class LineState:
    stopped: bool = False
    stop_reason: str = ""
    due: bool = False
    due_reason: str = ""
    units_since: int = 0
    anchor_utc: str | None = None  # last good golden check, or the releasing cal


def line_state(journal: JournalStore, plan: str, spec: GoldenSpec, *,
               cal_created: datetime | None = None, now: datetime | None = None) -> LineState:
    """The line's golden-check state for ``plan`` (see the module docstring)."""
    last = journal.last_golden(plan)
    last_pass = journal.last_good_golden_utc(plan)
    cal_text = utc_text(cal_created) if cal_created is not None else None
    anchor = last_pass
    if last is not None and not last["passed"]:
        if cal_text is None or cal_text <= last["time_utc"]:
            return LineState(True, f"the golden check at {last['time_utc'][:19]}Z failed: "
                             f"{last['message']}", anchor_utc=anchor)
        anchor = cal_text  # released by a calibration made after the failed check
    if anchor is None:
        return LineState(due=True, due_reason=f"no golden check on record for plan {plan}")
    units = journal.units_since(plan, anchor)
    if spec.every_units and units >= spec.every_units:
        return LineState(due=True, due_reason=f"{units} units since the last good golden "
                         f"check (every {spec.every_units})", units_since=units,
                         anchor_utc=anchor)
    elapsed = ((now or utc_now()) - parse_utc(anchor)).total_seconds()
    if spec.every_s and elapsed >= spec.every_s:
        return LineState(due=True, due_reason=f"{format_duration(elapsed)} since the last "
                         f"good golden check (every {format_duration(spec.every_s)})",
                         units_since=units, anchor_utc=anchor)
    return LineState(units_since=units, anchor_utc=anchor)
