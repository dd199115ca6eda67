"""The drift series of one soak job: worst values so far and the resonance Allan deviation.

The tracker holds one resonance reading and one time per sweep index (nan where missed),
keeps the worst of each drift figure, and recomputes the Allan deviation at most every
``ALLAN_EVERY_S`` (or when forced). It knows no journal and no alarms: the worker asks it.
"""

from __future__ import annotations

import math

import numpy as np

from acquire.soak.allan import AllanPoint
from acquire.soak.drift import SweepDrift
from acquire.soak.statistics import Minimums, allan_points

ALLAN_EVERY_S = 2.0  # the Allan deviation is recomputed at most this often
WORST_KEYS = ("max_db", "max_deg", "resonance_shift_hz", "worst_swr", "worst_swr_rise")


class DriftTracker:
    """Per-sweep resonance and times, the worst drift so far, and the Allan points."""

    def __init__(self, start: float, every_s: float, minimums: Minimums) -> None:
        self.start = start
        self.every_s = every_s
        self.minimums = minimums
        self.latest: SweepDrift | None = None
        self.worst: dict[str, float] = {}
        self.allan: list[AllanPoint] = []
        self.stats_note: str | None = "not enough data (no sweep yet)"
        self._allan_at = -math.inf
        self._resonance = np.full(1024, np.nan)
        self._t_s = np.full(1024, np.nan)

    def track(self, k: int, drift: SweepDrift, started: float) -> None:
        """Record sweep ``k`` (started at epoch ``started``) into the series and the worst."""
        if k >= self._resonance.size:
            size = max(k + 1, 2 * self._resonance.size)
            grow = np.full(size - self._resonance.size, np.nan)
            self._resonance = np.concatenate([self._resonance, grow])
            self._t_s = np.concatenate([self._t_s, grow.copy()])
        if drift.resonance_hz is not None:
            self._resonance[k] = drift.resonance_hz
        self._t_s[k] = started - self.start
        for key in WORST_KEYS:
            value = getattr(drift, key)
            if (value is not None and math.isfinite(value)
                    and abs(value) >= abs(self.worst.get(key, 0.0))):
                self.worst[key] = value

    def update_allan(self, n: int, now: float, force: bool = False) -> float | None:
        """Recompute over the first ``n`` indices when due; the worst deviation, if any."""
        if not force and now - self._allan_at < ALLAN_EVERY_S:
            return None
        self._allan_at = now
        found = allan_points(self._resonance[:n], self._t_s[:n], self.tau0(), self.minimums)
        self.allan, self.stats_note = ([], found) if isinstance(found, str) else (found, None)
        return max(p.adev for p in self.allan) if self.allan else None

    def tau0(self) -> float:
        """The basic averaging time: the schedule's interval, else the median spacing."""
        if self.every_s > 0:
            return self.every_s
        t = self._times()
        return float(np.median(np.diff(t))) if t.size >= 2 else 0.0

    def mean_period(self) -> float | None:
        """The mean time between recorded sweeps, None before two of them."""
        t = self._times()
        if t.size < 2:
            return None
        return float((t[-1] - t[0]) / (t.size - 1))

    def _times(self) -> np.ndarray:
        return self._t_s[np.isfinite(self._t_s)]
