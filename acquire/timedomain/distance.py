"""From round-trip time to distance along the cable, with optional loss compensation.

One-way distance d = v * t / 2 with v = c0 * VF (c0 = 299 792 458 m/s exactly, SI). The
published relations (shared reference note on time domain, sec. 1):

- range resolution dR = v / (2 * B) (rectangular window; band-pass span B; in low-pass
  mode the mirrored spectrum is 2 * f2 wide, so dR = v / (4 * f2)); a window widens it by
  its -6 dB main-lobe ratio;
- alias-free range R_max = v * (N - 1) / (2 * B).

A reflection at distance d returns through 2 d of cable and reads low by 2 * d * alpha
(dB, alpha the loss per metre at the band's centre, sec. 5). Compensation adds that back
at every distance, noise included (the floor rises with distance): say so when reading
far peaks.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from acquire.timedomain.transform import TimeResponse, TransformSettings, transform

C0 = 299_792_458.0  # m/s, exact (SI)
DEFAULT_SETTINGS = TransformSettings()


@dataclass(frozen=True)
class LineSettings:
    """The cable the distances are measured along."""

    velocity_factor: float
    loss_db_per_m: float | None = None  # at the band's centre; None: not known
    loss_source: str | None = None  # "loss_per_m" (the setting) or "cable <name>"
    compensate: bool = True  # add back the round-trip loss when the loss is known
    z0: float = 50.0

    @property
    def speed_m_s(self) -> float:
        return C0 * self.velocity_factor


@dataclass(frozen=True)
class DistanceProfile:
    """Reflection level (and, in low-pass mode, the step) against one-way distance."""

    response: TimeResponse
    line: LineSettings
    distance_m: np.ndarray
    level_db: np.ndarray  # 20 log10 |reflection| after loss compensation (when applied)
    loss_applied_db_per_m: float | None
    settings: TransformSettings = field(default_factory=TransformSettings)

    @property
    def return_loss_db(self) -> np.ndarray:
        """Return loss at each distance: -level (positive dB for a passive line)."""
        return -self.level_db

    @property
    def impedance_ohm(self) -> np.ndarray | None:
        """Low-pass step read as impedance, Z0 (1 + rho) / (1 - rho); None in band-pass."""
        step = self.response.step
        if step is None:
            return None
        with np.errstate(divide="ignore", invalid="ignore"):
            z = self.line.z0 * (1.0 + step) / (1.0 - step)
        return np.where(np.abs(step) < 1.0, z, np.nan)

    @property
    def bin_m(self) -> float:
        return self.line.speed_m_s * self.response.bin_s / 2.0

    @property
    def resolution_m(self) -> float:
        """Published relation, rectangular window: v / (2 B) (low-pass: v / (4 f2))."""
        return self.line.speed_m_s * self.response.resolution_s / 2.0

    @property
    def windowed_resolution_m(self) -> float:
        return self.resolution_m * self.response.window.mainlobe_6db_ratio

    @property
    def alias_free_range_m(self) -> float:
        """Published relation: v * (N - 1) / (2 B), i.e. v / (2 df)."""
        return self.line.speed_m_s * self.response.period_s / 2.0

    @property
    def shown_range_m(self) -> float:
        return float(self.distance_m[-1]) if self.distance_m.size else 0.0

    def axis_dict(self) -> dict[str, Any]:
        r = self.response
        return {
            "mode": r.mode,
            "window": r.window.to_dict(),
            "padding": self.settings.padding,
            "points": r.points,
            "n_fft": r.n_fft,
            "start_hz": r.start_hz,
            "stop_hz": r.stop_hz,
            "step_hz": r.step_hz,
            "dc_estimated": r.dc_estimated,
            "velocity_factor": self.line.velocity_factor,
            "speed_m_s": self.line.speed_m_s,
            "bin_m": self.bin_m,
            "resolution_m": self.resolution_m,
            "windowed_resolution_m": self.windowed_resolution_m,
            "alias_free_range_m": self.alias_free_range_m,
            "shown_range_m": self.shown_range_m,
            "loss": {
                "db_per_m": self.line.loss_db_per_m,
                "source": self.line.loss_source,
                "compensated": self.loss_applied_db_per_m is not None,
            },
        }


def distance_profile(freq_hz: np.ndarray, gamma: np.ndarray, line: LineSettings,
                     settings: TransformSettings = DEFAULT_SETTINGS) -> DistanceProfile:
    """Transform a reflection sweep and put it on the distance axis of ``line``."""
    response = transform(freq_hz, gamma, settings)
    distance = line.speed_m_s * response.time_s / 2.0
    level = response.level_db
    applied = None
    if line.compensate and line.loss_db_per_m:
        applied = line.loss_db_per_m
        level = level + round_trip_loss_db(distance, applied)
    return DistanceProfile(response, line, distance, level, applied, settings)


def round_trip_loss_db(distance_m: np.ndarray, loss_db_per_m: float) -> np.ndarray:
    """Loss of a reflection from ``distance_m``: it travels there and back (2 d alpha)."""
    return 2.0 * np.asarray(distance_m, dtype=np.float64) * loss_db_per_m


def band_centre_hz(freq_hz: np.ndarray, mode: str) -> float:
    """Where the loss per metre is taken: the band's centre (low-pass: from 0 Hz)."""
    lo = 0.0 if mode == "lowpass" else float(freq_hz[0])
    return (lo + float(freq_hz[-1])) / 2.0
