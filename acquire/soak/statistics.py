"""When a soak has enough data for its statistics, and the statistics it then computes.

A trend fitted to a few seconds of readings, or an Allan deviation from three sweeps, says
more about noise than about the device. Each statistic is therefore computed (shown,
alarmed on) only once the job has at least ``min_sweeps`` measured sweeps spanning at
least ``min_span_s``; until then it is reported as "not enough data". The defaults (20
sweeps over 10 minutes) are common practice for an overnight stability run, not a
standard, and a plan may change them (``soak: statistics: {min_sweeps, min_span}``).

An Allan-deviation point also needs ``MIN_ALLAN_TERMS`` difference terms: the confidence
interval of the estimate widens sharply below about ten terms (W. J. Riley, NIST SP 1065,
section 5.3: the equivalent degrees of freedom fall with the number of terms), so points
with fewer terms are neither shown nor alarmed on.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from acquire.soak.allan import AllanPoint, adev_curve
from acquire.units import format_duration

MIN_ALLAN_TERMS = 10


@dataclass(frozen=True)
class Minimums:
    """How much data a statistic needs before it is computed."""

    min_sweeps: int = 20
    min_span_s: float = 600.0

    def ready(self, sweeps: int, span_s: float) -> bool:
        return sweeps >= self.min_sweeps and span_s >= self.min_span_s

    def shortfall(self, sweeps: int, span_s: float) -> str:
        """Why a statistic is not shown yet, in words."""
        return (f"not enough data ({sweeps} sweep(s) over {format_duration(max(span_s, 0.0))};"
                f" needs at least {self.min_sweeps} over {format_duration(self.min_span_s)})")


@dataclass(frozen=True)
class Coverage:
    """How many readings exist and the time they span."""

    sweeps: int
    span_s: float

    @classmethod
    def of(cls, t_s: ArrayLike, y: ArrayLike) -> Coverage:
        t = np.asarray(t_s, dtype=np.float64)
        ok = np.isfinite(t) & np.isfinite(np.asarray(y, dtype=np.float64))
        if not ok.any():
            return cls(0, 0.0)
        return cls(int(ok.sum()), float(np.ptp(t[ok])))


def trend_per_hour(t_s: ArrayLike, y: ArrayLike, minimums: Minimums) -> float | str:
    """The least-squares slope of ``y`` per hour, or the shortfall text."""
    t = np.asarray(t_s, dtype=np.float64)
    values = np.asarray(y, dtype=np.float64)
    have = Coverage.of(t, values)
    if not minimums.ready(have.sweeps, have.span_s):
        return minimums.shortfall(have.sweeps, have.span_s)
    ok = np.isfinite(t) & np.isfinite(values)
    return float(np.polyfit(t[ok], values[ok], 1)[0]) * 3600.0


def allan_points(y: ArrayLike, t_s: ArrayLike, tau0_s: float,
                 minimums: Minimums) -> list[AllanPoint] | str:
    """The Allan deviation points with enough terms, or the shortfall text.

    ``y`` holds one reading per sweep index (nan where missed); ``t_s`` its times.
    """
    values = np.asarray(y, dtype=np.float64)
    have = Coverage.of(np.asarray(t_s, dtype=np.float64)[: values.size], values)
    if not minimums.ready(have.sweeps, have.span_s) or tau0_s <= 0:
        return minimums.shortfall(have.sweeps, have.span_s)
    points = [p for p in adev_curve(values, tau0_s) if p.terms >= MIN_ALLAN_TERMS]
    if not points:
        return (f"not enough data (no averaging time has {MIN_ALLAN_TERMS} complete terms "
                f"among {have.sweeps} sweeps)")
    return points
