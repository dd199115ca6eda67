"""Reflections on the distance axis: peaks, with the window's sidelobes told apart.

A peak is an interior local maximum of the reflection level at or above a floor. A big
reflection throws sidelobes along the whole axis (the window's own transform, shifted
to it); a local maximum that does not rise above the biggest neighbouring reflection's
sidelobe envelope (plus 3 dB) at that offset cannot be told from a sidelobe and is not
listed. The envelope comes from the window actually used (``TimeResponse.kernel_db``),
so a low-sidelobe window reveals small faults near big ones that a rectangular one
hides. Sidelobes are judged on the levels before loss compensation (compensation
raises far sidelobes and faults alike).

Position and level are refined by a parabola through the three samples around each
maximum (on the dB scale), which removes most of the scalloping between FFT bins.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from acquire.timedomain.distance import DistanceProfile

DEFAULT_FLOOR_DB = -50.0
SIDELOBE_MARGIN_DB = 3.0
MAX_CANDIDATES = 400
MAX_PEAKS = 50


@dataclass(frozen=True)
class Peak:
    """One reflection: where it is and how strong."""

    distance_m: float
    level_db: float  # reflection level after loss compensation (negative dB)
    measured_db: float  # reflection level as seen at the port (before compensation)
    sign: int | None  # low-pass: +1 impedance step up (toward an open), -1 down; else None

    @property
    def return_loss_db(self) -> float:
        return -self.level_db

    def to_dict(self) -> dict[str, Any]:
        return {
            "distance_m": self.distance_m,
            "level_db": self.level_db,
            "return_loss_db": self.return_loss_db,
            "measured_db": self.measured_db,
            "sign": self.sign,
        }


def find_peaks(profile: DistanceProfile, floor_db: float = DEFAULT_FLOOR_DB,
               max_peaks: int = MAX_PEAKS) -> list[Peak]:
    """The reflections of ``profile`` at or above ``floor_db``, nearest first."""
    level, raw = profile.level_db, profile.response.level_db
    if level.size < 3:
        return []
    mid = level[1:-1]
    interior = np.flatnonzero((mid > level[:-2]) & (mid >= level[2:]) & (mid >= floor_db)) + 1
    if interior.size == 0:
        return []
    interior = interior[np.argsort(raw[interior])[::-1][:MAX_CANDIDATES]]
    keep = interior[~_sidelobes(interior, raw, profile.response.kernel_db)]
    keep = np.sort(keep[np.argsort(level[keep])[::-1][:max_peaks]])
    return _refined(profile, keep)


def _sidelobes(idx: np.ndarray, raw: np.ndarray, kernel_db: np.ndarray) -> np.ndarray:
    """True for candidates hidden under a bigger candidate's sidelobe envelope."""
    n = kernel_db.size
    half = kernel_db[: n // 2 + 1]
    envelope = np.maximum.accumulate(half[::-1])[::-1]  # non-increasing with offset
    offset = np.abs(idx[:, None] - idx[None, :])
    offset = np.minimum(offset, n - offset)
    under = raw[idx][:, None] <= raw[idx][None, :] + envelope[offset] + SIDELOBE_MARGIN_DB
    bigger = raw[idx][None, :] > raw[idx][:, None]
    return np.any(under & bigger, axis=1)


def _refined(profile: DistanceProfile, idx: np.ndarray) -> list[Peak]:
    level, raw, d = profile.level_db, profile.response.level_db, profile.distance_m
    a, b, c = level[idx - 1], level[idx], level[idx + 1]
    denom = a - 2.0 * b + c
    with np.errstate(divide="ignore", invalid="ignore"):
        p = np.where(denom < 0, 0.5 * (a - c) / denom, 0.0)
    p = np.clip(np.nan_to_num(p), -0.5, 0.5)
    peak_level = b - 0.25 * (a - c) * p
    compensation = level[idx] - raw[idx]
    distance = d[idx] + p * profile.bin_m
    impulse = profile.response.impulse
    signs = np.sign(impulse[idx].real).astype(int) if profile.response.mode == "lowpass" else None
    return [
        Peak(float(distance[k]), float(peak_level[k]),
             float(peak_level[k] - compensation[k]),
             None if signs is None else int(signs[k]))
        for k in range(idx.size)
    ]
