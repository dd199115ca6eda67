"""The simulator's clock for drift: real elapsed time × rate, plus manual advances.

Tests set ``rate=0`` and ``advance()`` it to known times; the demo runs it at rate 1 or
faster (an overnight soak in minutes). Monotonic; thread-safe.
"""

from __future__ import annotations

import threading
import time


class SimClock:
    """Seconds since the simulator started, in simulated time."""

    def __init__(self, rate: float = 1.0) -> None:
        self._lock = threading.Lock()
        self._base = 0.0
        self._anchor = time.monotonic()
        self._rate = float(rate)

    def now(self) -> float:
        with self._lock:
            return self._base + self._rate * (time.monotonic() - self._anchor)

    @property
    def rate(self) -> float:
        return self._rate

    def set_rate(self, rate: float) -> None:
        """Change how fast simulated time runs relative to real time (0 stops it)."""
        if not rate >= 0:
            from simulators.errors import SimError

            raise SimError(f"clock: rate must be >= 0, got {rate}")
        with self._lock:
            real = time.monotonic()
            self._base += self._rate * (real - self._anchor)
            self._anchor, self._rate = real, float(rate)

    def advance(self, seconds: float) -> float:
        """Move simulated time forward; returns the new time."""
        if not seconds >= 0:
            from simulators.errors import SimError

            raise SimError(f"clock: can only advance by >= 0 s, got {seconds}")
        with self._lock:
            self._base += float(seconds)
        return self.now()
