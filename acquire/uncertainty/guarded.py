"""Guarded acceptance of a judged mask: every judged position as an interval.

``guard_mask`` takes the simple judgement of a mask (``acquire.masks.MaskResult``, whose
segments keep every judged position) and judges the same positions again with the
interval value ± guard·U (see ``decision``). The interval is taken on the sweep grid and
interpolated linearly to the segment ends, exactly as the mask interpolates the values.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from acquire.errors import MaskError
from acquire.metrics import bandwidth
from acquire.uncertainty.capture import SweepUncertainty
from acquire.uncertainty.decision import (
    FAIL,
    INDETERMINATE,
    DecisionRule,
    overall,
    point_states,
    runs,
)
from acquire.units import format_frequency
from drivers.errors import SweepdError


class GuardError(SweepdError):
    """A check cannot be judged with a guard band (no uncertainty for its parameter)."""


_BIG = 1e300  # stands for an open interval end (RL above a perfect match) in interpolation


@dataclass(frozen=True)
class GuardedSegment:
    """One segment under guarded acceptance."""

    verdict: str  # pass | indeterminate | fail | skipped
    rule: str  # "guarded", or "simple" for a quantity with no uncertainty model
    positions_indeterminate: int = 0
    positions_failed: int = 0
    indeterminate_ranges_hz: tuple[tuple[float, float], ...] = ()
    worst_guarded_margin: float | None = None
    note: str = ""

    def to_dict(self) -> dict[str, Any]:
        return {"verdict": self.verdict, "rule": self.rule,
                "positions_indeterminate": self.positions_indeterminate,
                "positions_failed": self.positions_failed,
                "indeterminate_ranges_hz": [list(r) for r in self.indeterminate_ranges_hz],
                "worst_guarded_margin": self.worst_guarded_margin, "note": self.note}


def guard_mask(result: Any, unc: SweepUncertainty | None, rule: DecisionRule
               ) -> tuple[str, list[GuardedSegment]]:
    """(overall verdict, one ``GuardedSegment`` per segment) of a ``MaskResult``."""
    segments = [_guard_segment(result.mask.name, s, unc, rule) for s in result.segments]
    order = {"pass": 0, "skipped": 0, "indeterminate": 1, "fail": 2}
    worst = max((order[g.verdict] for g in segments), default=0)
    return ("pass", "indeterminate", "fail")[worst], segments


def _guard_segment(mask: str, s: Any, unc: SweepUncertainty | None, rule: DecisionRule
                   ) -> GuardedSegment:
    seg = s.segment
    if s.verdict == "skipped":
        return GuardedSegment("skipped", "guarded")
    interval = unc.interval(seg.parameter, seg.quantity, rule.guard) if unc else None
    if interval is None:
        if seg.quantity in ("swr", "return_loss", "magnitude_db") and seg.parameter[1] == \
                seg.parameter[2]:
            why = unc.why_not(seg.parameter) if unc else "the sweep has no uncertainty"
            raise MaskError(f"mask {mask}: {seg.label}: guarded acceptance needs the "
                            f"uncertainty of {seg.parameter}, but {why}")
        note = f"no uncertainty model for {seg.parameter} {seg.quantity}: simple acceptance"
        return GuardedSegment(s.verdict, "simple", 0, int(s.failing.sum()), (),
                              s.worst.margin if s.worst else None, note)
    f = np.asarray(unc.freq_hz) if unc else np.empty(0)
    lo, hi = (np.interp(s.freq_hz, f, np.nan_to_num(a, posinf=_BIG, neginf=-_BIG))
              for a in interval)
    upper = seg.upper.at(s.freq_hz, seg.from_hz, seg.to_hz) if seg.upper else None
    lower = seg.lower.at(s.freq_hz, seg.from_hz, seg.to_hz) if seg.lower else None
    states = point_states(lo, hi, upper, lower)
    margins = np.full(states.shape, np.inf)
    if upper is not None:
        margins = np.minimum(margins, upper - hi)
    if lower is not None:
        margins = np.minimum(margins, lo - lower)
    worst = float(margins.min()) if margins.size else None
    return GuardedSegment(
        overall(states), "guarded", int((states == INDETERMINATE).sum()),
        int((states == FAIL).sum()),
        tuple(tuple(r) for r in runs(s.freq_hz, states == INDETERMINATE)),
        worst if worst is None or abs(worst) < _BIG / 10 else None)


def guarded_bandwidth(check: Any, base: Any, sweep: Any, rule: DecisionRule,
                      unc: SweepUncertainty | None) -> Any:
    """A bandwidth check under guarded acceptance: the band where |S| + w stays below
    the threshold is surely there, the band where |S| − w does is possibly there; pass
    if the sure band is wide enough, fail if even the possible band is not, else
    indeterminate. Both are taken around the resonance the simple check found."""
    if base.verdict == "error" or "center_hz" not in base.details:
        return base
    interval = unc.interval(check.parameter, "magnitude_db", rule.guard) if unc else None
    if interval is None:
        why = unc.why_not(check.parameter) if unc else "the sweep has no uncertainty"
        raise GuardError(f"{check.name}: guarded acceptance needs the uncertainty of "
                         f"{check.parameter}, but {why}")
    widths = []
    for level_db in (interval[1], interval[0]):  # sure (upper |S|), then possible (lower)
        mag = 10 ** (np.maximum(level_db, -300.0) / 20)
        bw = bandwidth(sweep.freq_hz, mag.astype(np.complex128), swr_max=check.swr_max,
                       return_loss_min_db=check.return_loss_min_db,
                       around_hz=base.details["center_hz"])
        widths.append(bw.width_hz if bw.band is not None else 0.0)
    sure, possible = widths
    need = check.at_least_hz
    verdict = "pass" if sure >= need else "fail" if possible < need else "indeterminate"
    details = {**base.details, "decision": rule.to_dict(),
               "guarded": {"verdict": verdict, "rule": "guarded", "sure_hz": sure,
                           "possible_hz": possible}}
    summary = (f"{check.name} {verdict}: surely {format_frequency(sure)}, possibly "
               f"{format_frequency(possible)}, required {format_frequency(need)}")
    return replace(base, verdict=verdict, summary=summary, details=details)


def guarded_result(check: Any, base: Any, rule: Any, uncertainty: Any) -> Any:
    """``base`` (a mask-like check's simple result) judged again with the guard band."""
    assert base.mask_result is not None
    verdict, segments = guard_mask(base.mask_result, uncertainty, rule)
    details = dict(base.details)
    if "segments" in details:
        details["segments"] = [{**d, "guarded": g.to_dict()}
                               for d, g in zip(details["segments"], segments, strict=True)]
    elif len(segments) == 1:
        details["guarded"] = segments[0].to_dict()
    else:  # one check over several parameters (return loss of S11 and S22)
        details["guarded"] = {s.segment.parameter: g.to_dict() for s, g in
                              zip(base.mask_result.segments, segments, strict=True)}
    details["decision"] = rule.to_dict()
    within = sum(g.positions_indeterminate for g in segments)
    rest = base.summary.removeprefix(f"{check.name} {base.verdict}:")
    more = f" ({within} positions within the guard band)" if within else ""
    return replace(base, verdict=verdict, summary=f"{check.name} {verdict}:{rest}{more}",
                   details=details)
