"""Overlapping Allan deviation of readings taken at a fixed interval.

For readings y_1 … y_M taken every τ0 and τ = m·τ0 (W. J. Riley, Handbook of Frequency
Stability Analysis, NIST SP 1065, 2008; IEEE Std 1139):

    ȳ_k = (y_k + … + y_{k+m−1}) / m
    σ²(τ) = 1 / (2 (M − 2m + 1)) · Σ_{k=1}^{M−2m+1} (ȳ_{k+m} − ȳ_k)²

The result has the units of y (here hertz of resonance frequency). Missed sweeps leave
gaps: an average ȳ_k that would include a missing reading is not formed, and the
differences that need it are left out (the sum is divided by twice the number of terms
actually used). With no gaps this is exactly the estimator above. Octave-spaced m up to
about M/4 is common practice (larger m have too few terms to mean much).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike


@dataclass(frozen=True)
class AllanPoint:
    """One point of the Allan deviation curve."""

    tau_s: float
    m: int
    adev: float
    terms: int

    def to_dict(self) -> dict[str, float | int]:
        return {"tau_s": self.tau_s, "m": self.m, "adev": self.adev, "terms": self.terms}


def overlapping_adev(y: ArrayLike, m: int, valid: ArrayLike | None = None) -> tuple[float, int]:
    """Overlapping Allan deviation of ``y`` at averaging factor ``m``, and the term count.

    ``valid`` marks the readings that exist (default: the finite ones). Returns
    ``(nan, 0)`` when no complete pair of averages exists.
    """
    values = np.asarray(y, dtype=np.float64)
    if values.ndim != 1:
        raise ValueError(f"readings must be one-dimensional, got shape {values.shape}")
    if m < 1:
        raise ValueError(f"averaging factor must be >= 1, got {m}")
    ok = np.isfinite(values) if valid is None else (np.asarray(valid, bool) & np.isfinite(values))
    count = values.size
    if count < 2 * m or not ok.any():
        return float("nan"), 0
    # Subtract one reading first so the running sums stay small (a resonance near 2.45 GHz
    # summed thousands of times would otherwise lose its hertz to rounding).
    centred = np.where(ok, values - values[np.argmax(ok)], 0.0)
    sums = np.concatenate(([0.0], np.cumsum(centred)))
    have = np.concatenate(([0], np.cumsum(ok, dtype=np.int64)))
    window = sums[m:] - sums[:-m]  # M − m + 1 window sums
    complete = (have[m:] - have[:-m]) == m
    diff = (window[m:] - window[:-m]) / m  # ȳ_{k+m} − ȳ_k
    usable = complete[m:] & complete[:-m]
    terms = int(np.count_nonzero(usable))
    if terms == 0:
        return float("nan"), 0
    return float(np.sqrt(np.sum(diff[usable] ** 2) / (2.0 * terms))), terms


def octave_factors(count: int) -> list[int]:
    """m = 1, 2, 4, … up to about a quarter of the readings (at least m = 1 when 2 exist)."""
    if count < 2:
        return []
    top = max(1, count // 4)
    factors, m = [], 1
    while m <= top:
        factors.append(m)
        m *= 2
    return factors


def adev_curve(y: ArrayLike, tau0_s: float, valid: ArrayLike | None = None,
               factors: list[int] | None = None) -> list[AllanPoint]:
    """The Allan deviation at τ = τ0·2^k (octave factors unless given)."""
    values = np.asarray(y, dtype=np.float64)
    points = []
    for m in factors if factors is not None else octave_factors(values.size):
        adev, terms = overlapping_adev(values, m, valid)
        if terms:
            points.append(AllanPoint(m * tau0_s, m, adev, terms))
    return points
