"""The uncertainty budget's drift figure, measured from a soak's sweeps.

The budget (``acquire.uncertainty.budget``) takes the drift since the calibration as
``drift_per_hour`` × age: RMS |ΔΓ| growing linearly with time, on top of a white trace
noise of RMS |ΔΓ| = σ (circular normal). For a soak of a stable standard this model
predicts the mean squared change between two sweeps τ apart, averaged over the frequency
points and over every pair of sweeps at that spacing:

    D(τ) = mean |Γ(t + τ) − Γ(t)|² = 2σ² + r²·τ²

(expand the square: the two sweeps' independent, zero-mean noises give 2σ², the linear
drift r·τ in a fixed direction per point gives r²τ², the cross terms average out). D(τ)
is the first-order structure function of the series, the statistic the Allan family of
variances is built from (W. J. Riley, Handbook of Frequency Stability Analysis, NIST
SP 1065, 2008, from memory: the Allan variance of phase data is a second difference of
the same kind, and a linear drift makes it grow as τ², as here). Fitting a = 2σ² and
b = r² by least squares over the lags, weighted by the number of sweep pairs at each
lag, is common practice; so is taking about 48 roughly log-spaced lags instead of all of
them (every lag up to about 16, then sparser), which keeps an overnight soak of
thousands of sweeps to a second or two. Negative fitted terms (noise, or no drift at
all) are reported as zero.

The sweeps come from the soak's per-point drift records (change of |S| in dB and of
phase against the reference, ``acquire.soak.devfile``) scaled by the reference's |S|,
so every measured sweep counts, not only those kept as Touchstone files. Like the
soak's other statistics (``acquire.soak.statistics``), no figure is given before the
plan's minimum number of sweeps and span.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from acquire.soak.statistics import Minimums

PLAN_KEY = "decision.uncertainty.drift_per_hour"
MAX_LAGS = 48
_CHUNK_ROWS = 256  # sweep pairs differenced at a time (bounds the temporary arrays)


@dataclass(frozen=True)
class LagPoint:
    """The structure function at one lag (in sweep indices)."""

    lag: int
    tau_s: float  # RMS time between the two sweeps of the lag's pairs
    d: float  # mean |ΔΓ|² over the points and the pairs
    pairs: int


@dataclass(frozen=True)
class DriftEstimate:
    """Drift per hour and trace noise fitted to a soak's structure function."""

    per_hour: float  # r: RMS |ΔΓ| per hour of linear drift
    noise_rms: float  # σ: RMS |ΔΓ| of one sweep's noise (trace noise + repeatability
    #                   without reconnection)
    sweeps: int
    pairs: int
    span_s: float
    lags: int
    points: int

    def to_dict(self) -> dict[str, Any]:
        return {"per_hour": self.per_hour, "noise_rms": self.noise_rms,
                "sweeps": self.sweeps, "pairs": self.pairs, "span_s": self.span_s,
                "lags": self.lags, "points": self.points}


def lag_steps(max_lag: int, count: int = MAX_LAGS) -> np.ndarray:
    """About ``count`` lags from 1 to ``max_lag``, log-spaced (so every small lag)."""
    if max_lag < 1:
        return np.zeros(0, dtype=np.int64)
    spaced = np.geomspace(1.0, float(max_lag), num=min(count, max_lag))
    return np.unique(np.round(spaced).astype(np.int64))


def structure_function(values: ArrayLike, seq: ArrayLike, t_s: ArrayLike,
                       lags: ArrayLike) -> list[LagPoint]:
    """D at each lag: ``values`` (sweeps × points, complex) at sweep indices ``seq``
    (increasing, gaps allowed: only pairs whose two sweeps exist count), times ``t_s``."""
    v = np.asarray(values, dtype=np.complex128)
    idx = np.asarray(seq, dtype=np.int64)
    t = np.asarray(t_s, dtype=np.float64)
    found = []
    for lag in np.asarray(lags, dtype=np.int64):
        first, second = _pairs(idx, int(lag))
        if not first.size:
            continue
        total = 0.0
        for start in range(0, first.size, _CHUNK_ROWS):
            diff = v[second[start:start + _CHUNK_ROWS]] - v[first[start:start + _CHUNK_ROWS]]
            total += float(np.sum(diff.real ** 2 + diff.imag ** 2))
        tau = float(np.sqrt(np.mean((t[second] - t[first]) ** 2)))
        found.append(LagPoint(int(lag), tau, total / (first.size * v.shape[1]), first.size))
    return found


def _pairs(seq: np.ndarray, lag: int) -> tuple[np.ndarray, np.ndarray]:
    """Row numbers (i, j) of every pair with seq[j] = seq[i] + lag."""
    j = np.searchsorted(seq, seq + lag)
    i = np.flatnonzero(j < seq.size)
    j = j[i]
    keep = seq[j] == seq[i] + lag
    return i[keep], j[keep]


def fit_drift(points: list[LagPoint]) -> tuple[float, float]:
    """(a, b) of D(τ) = a + b·τ² by least squares weighted by the pair counts."""
    tau2 = np.array([p.tau_s ** 2 for p in points])
    d = np.array([p.d for p in points])
    root_w = np.sqrt(np.array([p.pairs for p in points], dtype=np.float64))
    scale = float(tau2.max())  # τ² in units of the largest: a well-conditioned system
    design = np.column_stack([np.ones_like(tau2), tau2 / scale]) * root_w[:, None]
    (a, b_scaled), *_ = np.linalg.lstsq(design, d * root_w, rcond=None)
    return float(a), float(b_scaled) / scale


def estimate_drift(values: ArrayLike, seq: ArrayLike, t_s: ArrayLike,
                   minimums: Minimums) -> DriftEstimate | str:
    """The drift per hour and the noise of a series of sweeps, or why there is none.

    Points that are not finite in every sweep (e.g. |Γ| = 0 in dB) are left out."""
    v = np.atleast_2d(np.asarray(values, dtype=np.complex128))
    idx = np.asarray(seq, dtype=np.int64)
    t = np.asarray(t_s, dtype=np.float64)
    ok = np.isfinite(t)
    v, idx, t = v[ok], idx[ok], t[ok]
    order = np.argsort(idx, kind="stable")
    v, idx, t = v[order], idx[order], t[order]
    sweeps, span = idx.size, float(np.ptp(t)) if idx.size else 0.0
    if not minimums.ready(sweeps, span):
        return minimums.shortfall(sweeps, span)
    v = v[:, np.all(np.isfinite(v), axis=0)]
    if not v.shape[1]:
        return "no figure: no frequency point has a finite value in every sweep"
    points = structure_function(v, idx, t, lag_steps(int(idx[-1] - idx[0])))
    if len(points) < 2 or max(p.tau_s for p in points) <= 0:
        return (f"not enough data ({sweeps} sweep(s) give pairs at fewer than two "
                "different spacings)")
    a, b = fit_drift(points)
    return DriftEstimate(per_hour=float(np.sqrt(max(b, 0.0))) * 3600.0,
                         noise_rms=float(np.sqrt(max(a, 0.0) / 2.0)), sweeps=sweeps,
                         pairs=sum(p.pairs for p in points), span_s=span,
                         lags=len(points), points=int(v.shape[1]))
