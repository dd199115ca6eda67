"""Deadlines in seconds on the monotonic clock (immune to wall-clock jumps)."""

from __future__ import annotations

import time


class Deadline:
    """A point in time ``seconds`` from now; ``None`` means wait forever."""

    __slots__ = ("_end", "seconds")

    def __init__(self, seconds: float | None) -> None:
        if seconds is not None and not seconds >= 0:
            raise ValueError(f"a deadline needs seconds >= 0, got {seconds!r}")
        self.seconds = seconds
        self._end = None if seconds is None else time.monotonic() + seconds

    def remaining(self) -> float | None:
        """Seconds left (never negative), or ``None`` for no deadline."""
        if self._end is None:
            return None
        return max(0.0, self._end - time.monotonic())

    def expired(self) -> bool:
        return self._end is not None and time.monotonic() >= self._end
