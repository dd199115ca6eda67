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
them (every lag up to about 16, then sparser), which keeps a soak of thousands of
sweeps to a few seconds (``bench/budget_drift.py``). Negative fitted terms (noise, or no
drift at all) are reported as zero. How well the frequency points agree on r² is
estimated by a jackknife over ten blocks of neighbouring points; r² (at least zero) plus
twice that standard error gives the upper figure ("at most ... at k = 2"), the one to
use when the drift is too small for this soak to resolve.

The sweeps come from the soak's per-point drift records (change of |S| in dB and of
phase against the reference, ``acquire.soak.devfile``) scaled by the reference's |S|,
so every measured sweep counts, not only those kept as Touchstone files. Like the
soak's other statistics (``acquire.soak.statistics``), no figure is given before the
plan's minimum number of sweeps and span. Only the sweeps of one calibration count (the
one most sweeps used): a recalibration during the soak would show as a step.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from acquire.soak import history
from acquire.soak.drift import make_reference, reference_from_file
from acquire.soak.spec import SoakSpec
from acquire.soak.statistics import Minimums
from acquire.units import format_duration
from drivers.errors import SweepdError

PLAN_KEY = "decision.uncertainty.drift_per_hour"
MAX_LAGS = 48
JACKKNIFE_BLOCKS = 10
_CHUNK_ROWS = 256  # sweeps differenced at a time (bounds the temporary arrays)


@dataclass(frozen=True)
class LagPoint:
    """The structure function at one lag (in sweep indices)."""

    lag: int
    tau_s: float  # RMS time between the two sweeps of the lag's pairs
    d: float  # mean |ΔΓ|² over the points and the pairs
    pairs: int
    per_point: np.ndarray = field(repr=False, compare=False,
                                  default_factory=lambda: np.zeros(0))  # mean |ΔΓ|² each


@dataclass(frozen=True)
class DriftEstimate:
    """Drift per hour and trace noise fitted to a soak's structure function."""

    per_hour: float  # r: RMS |ΔΓ| per hour of linear drift
    per_hour_upper: float | None  # √(max(r², 0) + 2·its jackknife standard error)
    noise_rms: float  # σ: RMS |ΔΓ| of one sweep's noise (trace noise + repeatability
    #                   without reconnection)
    sweeps: int
    pairs: int
    span_s: float
    lags: int
    points: int

    def to_dict(self) -> dict[str, Any]:
        return {"per_hour": self.per_hour, "per_hour_upper": self.per_hour_upper,
                "noise_rms": self.noise_rms,
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
    rows = idx - idx[0]  # the sweeps on a full grid of indices, missing ones left empty
    full = np.zeros((int(rows[-1]) + 1, v.shape[1]), dtype=np.complex128)
    full[rows] = v - v.mean(axis=0)  # centred: differences keep their digits
    have = np.zeros(full.shape[0], dtype=bool)
    have[rows] = True
    times = np.full(full.shape[0], np.nan)
    times[rows] = np.asarray(t_s, dtype=np.float64)
    found = []
    for lag in np.asarray(lags, dtype=np.int64):
        both = have[lag:] & have[:-lag] if 0 < lag < full.shape[0] else np.zeros(0, bool)
        pairs = int(both.sum())
        if not pairs:
            continue
        per_point = _pair_sums(full, both, int(lag)) / pairs
        gaps = (times[lag:] - times[:-lag])[both]
        found.append(LagPoint(int(lag), float(np.sqrt(np.mean(gaps ** 2))),
                              float(per_point.mean()), pairs, per_point))
    return found


def _pair_sums(full: np.ndarray, both: np.ndarray, lag: int) -> np.ndarray:
    """Σ over the pairs (rows i, i + lag, both present) of |ΔΓ|², per point."""
    sums = np.zeros(full.shape[1])
    for start in range(0, both.size, _CHUNK_ROWS):
        stop = min(start + _CHUNK_ROWS, both.size)
        use = both[start:stop]
        later, earlier = full[start + lag:stop + lag], full[start:stop]
        if not use.all():
            later, earlier = later[use], earlier[use]
        diff = later - earlier
        sums += (diff.real ** 2 + diff.imag ** 2).sum(axis=0)
    return sums


def fit_drift(points: list[LagPoint]) -> tuple[float, float]:
    """(a, b) of D(τ) = a + b·τ² by least squares weighted by the pair counts."""
    tau2 = np.array([p.tau_s ** 2 for p in points])
    d = np.array([p.d for p in points])
    root_w = np.sqrt(np.array([p.pairs for p in points], dtype=np.float64))
    scale = float(tau2.max())  # τ² in units of the largest: a well-conditioned system
    design = np.column_stack([np.ones_like(tau2), tau2 / scale]) * root_w[:, None]
    (a, b_scaled), *_ = np.linalg.lstsq(design, d * root_w, rcond=None)
    return float(a), float(b_scaled) / scale


def jackknife_spread(points: list[LagPoint], blocks: int = JACKKNIFE_BLOCKS) -> float | None:
    """Standard error of the fitted r² by the delete-one-group jackknife over blocks of
    neighbouring frequency points (Efron and Tibshirani, An Introduction to the Bootstrap,
    1993, ch. 11, from memory); None with fewer than two points."""
    size = points[0].per_point.size
    groups = np.array_split(np.arange(size), min(blocks, size))
    if len(groups) < 2:
        return None
    fits = []
    for group in groups:
        keep = np.ones(size, dtype=bool)
        keep[group] = False
        fits.append(fit_drift([replace(p, d=float(p.per_point[keep].mean()))
                               for p in points])[1])
    b = np.array(fits)
    return float(np.sqrt((b.size - 1) / b.size * np.sum((b - b.mean()) ** 2)))


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
    spread = jackknife_spread(points)
    upper = None if spread is None else float(np.sqrt(max(b, 0.0) + 2.0 * spread)) * 3600.0
    return DriftEstimate(per_hour=float(np.sqrt(max(b, 0.0))) * 3600.0,
                         per_hour_upper=upper,
                         noise_rms=float(np.sqrt(max(a, 0.0) / 2.0)), sweeps=sweeps,
                         pairs=sum(p.pairs for p in points), span_s=span,
                         lags=len(points), points=int(v.shape[1]))


# -- a soak job's sweeps --------------------------------------------------------------------
def soak_drift(spec: SoakSpec, ser: history.Series,
               deviation: tuple[np.ndarray, ...] | None) -> dict[str, Any]:
    """The figure for the plan's ``decision.uncertainty.drift_per_hour`` from one soak,
    as the report's JSON block: the estimate, or ``reason`` when there is none."""
    block: dict[str, Any] = {"plan_key": PLAN_KEY, "parameter": spec.parameter}
    if deviation is None or not deviation[1].size:
        return {**block, "reason": "no figure: the job has no per-point drift records yet"}
    freq, seq, db, deg = deviation
    reference = _reference_magnitude(spec, ser, freq)
    if isinstance(reference, str):
        return {**block, "reason": reference}
    cal_of = {int(q): c for q, c in zip(ser.seq, ser.cal_id, strict=True)}
    chosen, rows = one_calibration([cal_of.get(int(q)) for q in seq])
    when = {int(q): float(t) for q, t, done in zip(ser.seq, ser.t_s, ser.done_mask(),
                                                 strict=True) if done}
    t_s = np.array([when.get(int(q), np.nan) for q in seq[rows]])
    values = reference * 10.0 ** (db[rows].astype(np.float64) / 20.0) \
        * np.exp(1j * np.radians(deg[rows].astype(np.float64)))
    found = estimate_drift(values, seq[rows], t_s, spec.minimums)
    if isinstance(found, str):
        return {**block, "reason": found}
    return {**block, **found.to_dict(), "corrected": bool(chosen), "calibration": chosen,
            "other_calibration_sweeps": int(rows.size - rows.sum())}


def one_calibration(cal_ids: list[str | None]) -> tuple[str | None, np.ndarray]:
    """The calibration most sweeps were corrected with (the later of equals; None: raw)
    and which rows it corrected: a recalibration mid-soak is a step, not drift."""
    counts = Counter(cal_ids)
    last = {cal: i for i, cal in enumerate(cal_ids)}
    chosen = max(counts, key=lambda cal: (counts[cal], last[cal]))
    return chosen, np.array([cal == chosen for cal in cal_ids], dtype=bool)


def _reference_magnitude(spec: SoakSpec, ser: history.Series,
                         freq_hz: np.ndarray) -> np.ndarray | str:
    """|S| of the sweeps' reference on the records' grid: the plan's reference file, or
    the first stored sweep (the reference 'first' is always kept), or why it is missing."""
    from acquire.touchstone import read_touchstone

    path = spec.reference
    if path is None:
        stored = [p for p, st in zip(ser.touchstone, ser.state, strict=True)
                  if st == "stored" and p]
        if not stored:
            return "no figure: the reference sweep was not kept as a file"
        path = Path(stored[0])
    try:
        if spec.reference is not None:
            ref = reference_from_file(path, spec.parameter, spec.band_hz, freq_hz)
        else:
            ref = make_reference(read_touchstone(path).to_sweep(), spec.parameter,
                                 spec.band_hz, str(path), freq_hz)
    except (SweepdError, OSError, ValueError) as exc:
        return f"no figure: the reference {path} cannot be read ({exc})"
    return np.abs(ref.values)


def budget_line(block: dict[str, Any]) -> str:
    """The report's one line about the figure."""
    head = f"drift for the uncertainty budget ({block['plan_key']}): "
    if "reason" in block:
        return head + block["reason"]
    upper = block["per_hour_upper"]
    bound = f" (at most {upper:.2g} at k = 2)" if upper is not None else ""
    line = (f"RMS |d{block['parameter']}| {block['per_hour']:.2g} per hour{bound}; trace "
            f"noise {block['noise_rms']:.2g} RMS; {block['sweeps']} sweeps over "
            f"{format_duration(block['span_s'])}, {block['pairs']} pairs")
    if block["other_calibration_sweeps"]:
        line += (f"; {block['other_calibration_sweeps']} sweep(s) corrected by another "
                 "calibration left out")
    if not block["corrected"]:
        line += "; the sweeps are uncorrected: the raw instrument's figure"
    return head + line
