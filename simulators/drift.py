"""Slow drift of the device's resonance, with statistics that tests can check.

    T(t)     = 23 °C + amplitude_c · sin(2π t / period_s)         (temperature cycle)
    shift(t) = tempco_hz_per_c · (T(t) − 23 °C) + rate_hz_per_s · t + jitter_hz · N(0, 1)

so the resonance moves linearly with temperature, plus an optional linear drift in time
and a white jitter drawn once per sweep with known sigma. Expected Allan deviations
(W. J. Riley, Handbook of Frequency Stability Analysis, NIST SP 1065, 2008): white jitter
σ_y(m·τ0) ≈ jitter_hz/√m; linear drift D gives σ_y(τ) = D·τ/√2. ``t`` is the simulator
clock (``simulators.clock``).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

from simulators.errors import SimError

REFERENCE_C = 23.0


@dataclass(frozen=True)
class Drift:
    """Drift settings; all zero means no drift."""

    period_s: float = 0.0
    amplitude_c: float = 0.0
    tempco_hz_per_c: float = 0.0
    rate_hz_per_s: float = 0.0
    jitter_hz: float = 0.0

    def __post_init__(self) -> None:
        for name, value in asdict(self).items():
            if not isinstance(value, (int, float)) or not math.isfinite(value):
                raise SimError(f"drift: {name} must be a finite number, got {value!r}")
        if self.period_s < 0 or self.jitter_hz < 0:
            raise SimError("drift: period_s and jitter_hz must be >= 0")

    @property
    def active(self) -> bool:
        return any(asdict(self).values())

    def temperature_c(self, t: float) -> float:
        if self.period_s <= 0:
            return REFERENCE_C
        return REFERENCE_C + self.amplitude_c * math.sin(2.0 * math.pi * t / self.period_s)

    def offset_hz(self, t: float) -> float:
        """The deterministic part of the shift at simulated time ``t`` (no jitter)."""
        return (self.tempco_hz_per_c * (self.temperature_c(t) - REFERENCE_C)
                + self.rate_hz_per_s * t)
