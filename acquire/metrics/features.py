"""Features of a sweep: resonance, threshold bands, bandwidth and Q.

Methods follow D. M. Pozar, Microwave Engineering, 4th ed., ch. 6 (resonators, Q,
coupling) and A. P. Gregory, "Q-factor measurement by using a vector network analyser",
NPL Report MAT 58 (2021). Everything is vectorised; loops run over bands, not points.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from acquire.metrics.conversions import (
    admittance,
    db20,
    gamma_from_swr,
    impedance,
)
from acquire.metrics.errors import MetricError


@dataclass(frozen=True)
class Resonance:
    """Where a one-port resonates.

    ``freq_hz`` is refined between sweep points; ``index`` is the nearest sweep point.
    ``at_edge`` is true when the minimum sits on the first or last point, so it could
    not be refined and the true resonance may lie outside the sweep. ``gamma_abs`` is
    the (interpolated) |Γ| there.
    """

    freq_hz: float
    gamma_abs: float
    index: int
    at_edge: bool
    method: str


def _finite_1d(name: str, values: np.ndarray) -> None:
    if values.ndim != 1:
        raise MetricError(f"{name} must be one-dimensional, got shape {values.shape}")
    bad = ~np.isfinite(values)
    if bad.any():
        raise MetricError(f"{name} is not finite at point {int(np.argmax(bad))}")


def parabola_vertex(x: np.ndarray, y: np.ndarray) -> tuple[float, float]:
    """Vertex (x, y) of the parabola through three points (any spacing)."""
    x0, x1, x2 = (float(v) for v in x)
    y0, y1, y2 = (float(v) for v in y)
    d10, d12 = x1 - x0, x1 - x2
    den = d10 * (y1 - y2) - d12 * (y1 - y0)
    if den == 0.0:
        return x1, y1
    xv = x1 - 0.5 * (d10 * d10 * (y1 - y2) - d12 * d12 * (y1 - y0)) / den
    # Value at the vertex from the Lagrange form of the same parabola.
    l0 = (xv - x1) * (xv - x2) / ((x0 - x1) * (x0 - x2))
    l1 = (xv - x0) * (xv - x2) / ((x1 - x0) * (x1 - x2))
    l2 = (xv - x0) * (xv - x1) / ((x2 - x0) * (x2 - x1))
    return xv, y0 * l0 + y1 * l1 + y2 * l2


def resonance_min_gamma(freq_hz: ArrayLike, gamma: ArrayLike) -> Resonance:
    """Resonance at the minimum |Γ|, refined by a parabola through the smallest bin
    and its two neighbours (p = ½(a − c)/(a − 2b + c) on an even grid)."""
    f = np.asarray(freq_hz, dtype=np.float64)
    mag = np.abs(np.asarray(gamma, dtype=np.complex128))
    _finite_1d("|Γ|", mag)
    if f.size == 0:
        raise MetricError("resonance needs at least one sweep point")
    k = int(np.argmin(mag))
    if k == 0 or k == f.size - 1:
        return Resonance(float(f[k]), float(mag[k]), k, True, "min_gamma")
    fv, mv = parabola_vertex(f[k - 1 : k + 2], mag[k - 1 : k + 2])
    # A parabola through a sampled minimum always peaks inside the bracket; clamp
    # against rounding so the result never leaves it.
    fv = min(max(fv, float(f[k - 1])), float(f[k + 1]))
    return Resonance(fv, max(mv, 0.0), k, False, "min_gamma")


@dataclass(frozen=True)
class Crossings:
    """Frequencies where a real trace crosses zero, interpolated linearly.

    ``rising`` is true where the trace goes from negative to positive (for reactance:
    a series resonance; falling is a parallel resonance).
    """

    freq_hz: np.ndarray
    rising: np.ndarray


def zero_crossings(freq_hz: ArrayLike, values: ArrayLike) -> Crossings:
    """Every sign change of ``values``: f = f_j − v_j·(f_{j+1} − f_j)/(v_{j+1} − v_j).

    A point exactly at zero counts once, at its own frequency.
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    v = np.asarray(values, dtype=np.float64)
    _finite_1d("trace", v)
    s = np.sign(v)
    exact = np.flatnonzero(s == 0)
    j = np.flatnonzero(s[:-1] * s[1:] < 0)
    fc = f[j] - v[j] * (f[j + 1] - f[j]) / (v[j + 1] - v[j])
    # Direction at an exact zero: from the neighbours' signs (next minus previous).
    nxt = s[np.minimum(exact + 1, s.size - 1)]
    prv = s[np.maximum(exact - 1, 0)]
    keep = nxt != prv  # a touch without a sign change is not a crossing
    freq = np.concatenate([fc, f[exact[keep]]])
    rising = np.concatenate([v[j + 1] > 0, (nxt - prv)[keep] > 0])
    order = np.argsort(freq, kind="stable")
    return Crossings(freq[order], rising[order])


def resonance_reactance(
    freq_hz: ArrayLike, gamma: ArrayLike, z0: float = 50.0, near_hz: float | None = None
) -> Resonance | None:
    """Resonance at the reactance zero crossing (X = Im Z) nearest ``near_hz``
    (default: the minimum-|Γ| resonance); ``None`` if X never changes sign."""
    f = np.asarray(freq_hz, dtype=np.float64)
    g = np.asarray(gamma, dtype=np.complex128)
    z = impedance(g, z0)
    crossings = zero_crossings(f, z.imag)
    if crossings.freq_hz.size == 0:
        return None
    if near_hz is None:
        near_hz = resonance_min_gamma(f, g).freq_hz
    i = int(np.argmin(np.abs(crossings.freq_hz - near_hz)))
    fr = float(crossings.freq_hz[i])
    k = int(np.argmin(np.abs(f - fr)))
    mag = float(np.abs(np.interp(fr, f, g.real) + 1j * np.interp(fr, f, g.imag)))
    return Resonance(fr, mag, k, False, "reactance_zero")


@dataclass(frozen=True)
class Band:
    """A contiguous run of frequencies where a trace is at or below a threshold.

    Edges are interpolated between the sweep points around each crossing. ``lo_open``
    / ``hi_open`` mean the band runs into the start / end of the sweep, so that edge is
    the sweep limit, not a crossing, and the true band may be wider.
    """

    lo_hz: float
    hi_hz: float
    lo_open: bool
    hi_open: bool

    @property
    def width_hz(self) -> float:
        return self.hi_hz - self.lo_hz

    @property
    def edge_limited(self) -> bool:
        return self.lo_open or self.hi_open

    def contains(self, freq_hz: float) -> bool:
        return self.lo_hz <= freq_hz <= self.hi_hz


def bands_below(freq_hz: ArrayLike, values: ArrayLike, threshold: float) -> list[Band]:
    """All contiguous bands where ``values <= threshold``, edges linearly interpolated."""
    f = np.asarray(freq_hz, dtype=np.float64)
    v = np.asarray(values, dtype=np.float64)
    _finite_1d("trace", v)
    if f.shape != v.shape:
        raise MetricError(f"frequency and trace sizes differ: {f.size} and {v.size}")
    inside = (v <= threshold).astype(np.int8)
    if not inside.any():
        return []
    step = np.diff(inside)
    starts = np.flatnonzero(step == 1) + 1
    ends = np.flatnonzero(step == -1)
    if inside[0]:
        starts = np.concatenate([[0], starts])
    if inside[-1]:
        ends = np.concatenate([ends, [f.size - 1]])
    lo_open = starts == 0
    hi_open = ends == f.size - 1
    a = np.maximum(starts - 1, 0)
    b = np.minimum(ends + 1, f.size - 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        lo = f[a] + (threshold - v[a]) * (f[starts] - f[a]) / (v[starts] - v[a])
        hi = f[ends] + (threshold - v[ends]) * (f[b] - f[ends]) / (v[b] - v[ends])
    lo = np.where(lo_open, f[starts], lo)
    hi = np.where(hi_open, f[ends], hi)
    return [
        Band(float(lo[i]), float(hi[i]), bool(lo_open[i]), bool(hi_open[i]))
        for i in range(starts.size)
    ]


@dataclass(frozen=True)
class Bandwidth:
    """The band around ``center_hz`` where |Γ| stays at or below a threshold.

    ``threshold_db`` is the threshold as S11 in dB (negative). ``band`` is ``None``
    when the trace is above the threshold at ``center_hz``; ``bands`` holds every band
    found in the sweep.
    """

    threshold_db: float
    center_hz: float
    band: Band | None
    bands: tuple[Band, ...]

    @property
    def width_hz(self) -> float:
        return self.band.width_hz if self.band else 0.0

    @property
    def fractional(self) -> float:
        """Bandwidth over the centre (resonance) frequency."""
        return self.width_hz / self.center_hz

    @property
    def edge_limited(self) -> bool:
        return bool(self.band and self.band.edge_limited)


def threshold_db(*, swr_max: float | None = None, return_loss_min_db: float | None = None) -> float:
    """A bandwidth threshold (SWR or positive return loss) as S11 in dB."""
    if (swr_max is None) == (return_loss_min_db is None):
        raise MetricError("give exactly one bandwidth threshold: an SWR or a return loss")
    if swr_max is not None:
        return float(db20(gamma_from_swr(swr_max)))
    if not np.isfinite(return_loss_min_db) or return_loss_min_db <= 0:
        raise MetricError(f"return loss threshold must be positive dB, got {return_loss_min_db}")
    return -float(return_loss_min_db)


def bandwidth(
    freq_hz: ArrayLike,
    gamma: ArrayLike,
    *,
    swr_max: float | None = None,
    return_loss_min_db: float | None = None,
    around_hz: float | None = None,
) -> Bandwidth:
    """Bandwidth below an SWR or return-loss threshold around the resonance.

    Crossings are interpolated linearly in S11 dB between the points around them.
    ``around_hz`` defaults to the minimum-|Γ| resonance.
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    g = np.asarray(gamma, dtype=np.complex128)
    t = threshold_db(swr_max=swr_max, return_loss_min_db=return_loss_min_db)
    bands = bands_below(f, db20(g), t)
    if around_hz is None:
        around_hz = resonance_min_gamma(f, g).freq_hz
    band = next((b for b in bands if b.contains(around_hz)), None)
    return Bandwidth(t, float(around_hz), band, tuple(bands))


@dataclass(frozen=True)
class QEstimate:
    """Q of a one-port resonance.

    ``model`` is ``series`` (X rises through zero) or ``parallel`` (X falls, B rises).
    ``coupling`` β = Q0/Qe: Z0/R for series, R/Z0 for parallel (β > 1 overcoupled).
    """

    unloaded: float
    loaded: float
    coupling: float
    model: str


def q_factor(freq_hz: ArrayLike, gamma: ArrayLike, f0_hz: float, z0: float = 50.0) -> QEstimate:
    """Q from the reactance slope at resonance (Pozar ch. 6; NPL Report MAT 58).

    Series: Q0 = (f0/2R)·dX/df; parallel: Q0 = (f0/2G)·dB/df; Q_L = Q0/(1 + β).
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    g = np.asarray(gamma, dtype=np.complex128)
    if f.size < 3:
        raise MetricError("a Q estimate needs at least 3 sweep points")
    if not f[0] <= f0_hz <= f[-1]:
        raise MetricError(f"resonance {f0_hz:g} Hz lies outside the sweep")
    z = impedance(g, z0)
    slope_x = float(np.interp(f0_hz, f, np.gradient(z.imag, f)))
    if slope_x > 0:
        model, imm = "series", z
    else:
        model, imm = "parallel", admittance(g, z0)
    re0 = float(np.interp(f0_hz, f, imm.real))
    slope = float(np.interp(f0_hz, f, np.gradient(imm.imag, f)))
    if not (np.isfinite(re0) and np.isfinite(slope)) or re0 <= 0 or slope <= 0:
        raise MetricError(f"no clean resonance at {f0_hz:g} Hz for a Q estimate")
    q0 = f0_hz / (2.0 * re0) * slope
    beta = z0 / re0 if model == "series" else 1.0 / (re0 * z0)
    return QEstimate(q0, q0 / (1.0 + beta), beta, model)
