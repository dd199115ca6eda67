"""Stimulus settings as the driver layer sees them: SI units, validated, immutable."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

S_PARAMETERS = ("S11", "S21", "S12", "S22")


@dataclass(frozen=True)
class Stimulus:
    """A linear frequency sweep and the source/receiver settings that go with it.

    Frequencies in Hz, power in dBm, IF bandwidth in Hz; ``averaging`` is the number of
    sweeps averaged by the instrument (1 means averaging off).
    """

    start_hz: float
    stop_hz: float
    points: int
    power_dbm: float
    if_bandwidth_hz: float
    averaging: int = 1

    def __post_init__(self) -> None:
        if not (self.points >= 1 and self.averaging >= 1):
            raise ValueError("points and averaging must be at least 1")
        if not (0 < self.start_hz <= self.stop_hz):
            raise ValueError("need 0 < start <= stop")
        if self.points > 1 and self.start_hz == self.stop_hz:
            raise ValueError("a sweep of several points needs start < stop")
        if self.if_bandwidth_hz <= 0:
            raise ValueError("IF bandwidth must be positive")

    def frequencies(self) -> np.ndarray:
        """The sweep's frequency grid in Hz (float64, linear, inclusive)."""
        return np.linspace(self.start_hz, self.stop_hz, self.points)

    def same_grid(self, other: Stimulus) -> bool:
        """True when both sweeps put their points on the same frequencies."""
        return (self.start_hz, self.stop_hz, self.points) == (
            other.start_hz,
            other.stop_hz,
            other.points,
        )
