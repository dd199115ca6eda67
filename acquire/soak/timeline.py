"""When each sweep of a soak is due, on a clock that survives restarts.

Sweep ``k`` is due at ``start + k·every`` (UTC seconds). A sweep may start late within its
own slot (before sweep ``k + 1`` is due); a slot that has passed entirely is a missed
sweep. With ``every = 0`` sweeps run back to back and no slot ever passes. Within one
process the clock is the monotonic clock anchored to the wall clock once, so a clock
step does not upset the schedule; across restarts the wall clock is all there is.
"""

from __future__ import annotations

import math
import time

from acquire.soak.spec import Schedule


class Clock:
    """Wall-clock seconds that advance with the monotonic clock."""

    def __init__(self) -> None:
        self._wall0 = time.time()
        self._mono0 = time.monotonic()

    def now(self) -> float:
        return self._wall0 + (time.monotonic() - self._mono0)


class Timeline:
    """The due times of one job's sweeps."""

    def __init__(self, schedule: Schedule, start: float) -> None:
        self.schedule = schedule
        self.start = start

    @property
    def every(self) -> float:
        return self.schedule.every_s

    def due(self, k: int) -> float:
        return self.start + k * self.every

    def slot_end(self, k: int) -> float:
        """When sweep ``k`` can no longer be taken (infinite when back to back)."""
        return self.due(k + 1) if self.every > 0 else math.inf

    def in_plan(self, k: int, now: float) -> bool:
        """Whether sweep ``k`` belongs to the job (count, duration, or open-ended)."""
        s = self.schedule
        if s.count is not None:
            return k < s.count
        if s.duration_s is not None:
            end = self.start + s.duration_s
            return self.due(k) < end if self.every > 0 else now < end
        return True

    def current_index(self, now: float) -> int:
        """The index whose slot holds ``now`` (0 before the start; unused when every=0)."""
        if self.every <= 0 or now <= self.start:
            return 0
        return math.floor((now - self.start) / self.every + 1e-9)

    def end_time(self) -> float | None:
        s = self.schedule
        if s.count is not None and self.every > 0:
            return self.due(s.count - 1)
        if s.duration_s is not None:
            return self.start + s.duration_s
        return None
