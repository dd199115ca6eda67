"""Point-by-point RF quantities from S-parameters, vectorised over frequency.

Formulas: D. M. Pozar, Microwave Engineering, 4th ed., ch. 2 (reflection coefficient,
SWR, return loss, mismatch loss, impedance) and ch. 6 (series/parallel equivalents).
Γ is a one-port reflection coefficient (S11 or S22) against a real reference ``z0``.

Conventions kept in one place:

- magnitudes in dB are ``20·log10|x|``; an exact zero is clamped to ``DB_FLOOR``
  (−300 dB, far below any measurement) instead of −∞, so results stay finite;
- return loss is positive for a passive load (RL = −20·log10|Γ|, the standard
  definition; see T. S. Bird, IEEE Antennas Propag. Mag., 2009). The negative plotting
  habit is available only on request (``negative=True``);
- where a quantity does not exist (SWR at |Γ| ≥ 1, mismatch loss at |Γ| > 1) the result
  is ``inf`` or ``nan`` and never clipped: an active or miscalibrated reflection must be
  flagged, not hidden. ``passive_violations`` finds those points.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from acquire.metrics.errors import MetricError

DB_FLOOR = -300.0
_MAG_FLOOR = 10.0 ** (DB_FLOOR / 20.0)


def db20(x: ArrayLike) -> np.ndarray:
    """``20·log10|x|`` in dB, with exact zeros clamped to ``DB_FLOOR``."""
    mag = np.abs(np.asarray(x))
    return 20.0 * np.log10(np.maximum(mag, _MAG_FLOOR))


def phase_deg(x: ArrayLike, *, unwrap: bool = False) -> np.ndarray:
    """Phase in degrees: wrapped to [−180, 180], or unwrapped along the last axis."""
    angle = np.angle(np.asarray(x, dtype=np.complex128))
    if unwrap:
        angle = np.unwrap(angle, axis=-1)
    return np.degrees(angle)


def passive_violations(gamma: ArrayLike) -> np.ndarray:
    """Boolean mask of points with |Γ| ≥ 1 (no finite SWR; active or miscalibrated)."""
    return np.abs(np.asarray(gamma)) >= 1.0


def swr(gamma: ArrayLike) -> np.ndarray:
    """SWR = (1 + |Γ|)/(1 − |Γ|); ``inf`` where |Γ| ≥ 1 (Pozar ch. 2)."""
    mag = np.abs(np.asarray(gamma, dtype=np.complex128))
    out = np.full(mag.shape, np.inf)
    ok = mag < 1.0
    out[ok] = (1.0 + mag[ok]) / (1.0 - mag[ok])
    return out


def gamma_from_swr(value: ArrayLike) -> np.ndarray:
    """|Γ| = (SWR − 1)/(SWR + 1); SWR must be ≥ 1 (``inf`` gives 1)."""
    s = np.asarray(value, dtype=np.float64)
    if np.any(np.isnan(s)) or np.any(s < 1.0):
        bad = float(s[np.isnan(s) | (s < 1.0)][0])
        raise MetricError(f"SWR must be at least 1, got {bad:g}")
    with np.errstate(invalid="ignore"):
        out = (s - 1.0) / (s + 1.0)
    return np.where(np.isinf(s), 1.0, out)


def return_loss_db(gamma: ArrayLike, *, negative: bool = False) -> np.ndarray:
    """Return loss RL = −20·log10|Γ| (positive for a passive load).

    ``negative=True`` gives the plotting habit (the same number as S11 in dB).
    """
    rl = -db20(gamma)
    return -rl if negative else rl


def return_loss_from_swr(value: ArrayLike) -> np.ndarray:
    """Return loss in dB (positive) for an SWR ≥ 1."""
    return return_loss_db(gamma_from_swr(value))


def swr_from_return_loss(rl_db: ArrayLike) -> np.ndarray:
    """SWR for a positive return loss in dB."""
    mag = 10.0 ** (-np.asarray(rl_db, dtype=np.float64) / 20.0)
    return swr(mag)


def mismatch_loss_db(gamma: ArrayLike) -> np.ndarray:
    """ML = −10·log10(1 − |Γ|²): power lost to reflection (Pozar ch. 2).

    ``inf`` at |Γ| = 1 and ``nan`` for |Γ| > 1, where the quantity does not exist.
    """
    mag2 = np.abs(np.asarray(gamma, dtype=np.complex128)) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        return -10.0 * np.log10(1.0 - mag2)


def reflected_power_fraction(gamma: ArrayLike) -> np.ndarray:
    """|Γ|²: the fraction of incident power reflected."""
    return np.abs(np.asarray(gamma)) ** 2


def impedance(gamma: ArrayLike, z0: float = 50.0) -> np.ndarray:
    """Z = Z0·(1 + Γ)/(1 − Γ) = R + jX in ohms; Γ = 1 (open) gives ``inf``."""
    g = np.asarray(gamma, dtype=np.complex128)
    den = 1.0 - g
    open_ = den == 0
    with np.errstate(divide="ignore", invalid="ignore"):
        z = z0 * (1.0 + g) / np.where(open_, 1.0, den)
    return np.where(open_, complex(np.inf, 0.0), z)


def reflection(z: ArrayLike, z0: float = 50.0) -> np.ndarray:
    """Γ = (Z − Z0)/(Z + Z0); an infinite Z gives Γ = 1."""
    zz = np.asarray(z, dtype=np.complex128)
    inf = np.isinf(zz)
    with np.errstate(divide="ignore", invalid="ignore"):
        g = (zz - z0) / (zz + z0)
    return np.where(inf, 1.0 + 0.0j, g)


def admittance(gamma: ArrayLike, z0: float = 50.0) -> np.ndarray:
    """Y = (1/Z0)·(1 − Γ)/(1 + Γ) = G + jB in siemens; Γ = −1 (short) gives ``inf``."""
    g = np.asarray(gamma, dtype=np.complex128)
    den = 1.0 + g
    short = den == 0
    with np.errstate(divide="ignore", invalid="ignore"):
        y = (1.0 - g) / (z0 * np.where(short, 1.0, den))
    return np.where(short, complex(np.inf, 0.0), y)


def polar(z: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """(|Z|, ∠Z in degrees) of a complex array."""
    zz = np.asarray(z, dtype=np.complex128)
    return np.abs(zz), np.degrees(np.arctan2(zz.imag, zz.real))


@dataclass(frozen=True)
class SeriesEquivalent:
    """R + jX seen as a resistor in series with an inductor (X > 0) or capacitor (X < 0).

    ``inductance_h`` is ``nan`` where X ≤ 0, ``capacitance_f`` is ``nan`` where X ≥ 0.
    ``q`` is the element Q = |X|/R.
    """

    resistance_ohm: np.ndarray
    inductance_h: np.ndarray
    capacitance_f: np.ndarray
    q: np.ndarray


def series_equivalent(freq_hz: ArrayLike, z: ArrayLike) -> SeriesEquivalent:
    """Series equivalent at each frequency: L_s = X/ω, C_s = −1/(ωX) (Pozar ch. 6)."""
    w = 2.0 * np.pi * np.asarray(freq_hz, dtype=np.float64)
    zz = np.asarray(z, dtype=np.complex128)
    x = zz.imag
    with np.errstate(divide="ignore", invalid="ignore"):
        ind = np.where(x > 0, x / w, np.nan)
        cap = np.where(x < 0, -1.0 / (w * x), np.nan)
        q = np.abs(x) / zz.real
    return SeriesEquivalent(zz.real, ind, cap, q)


@dataclass(frozen=True)
class ParallelEquivalent:
    """G + jB seen as R_p in parallel with X_p (an inductor if B < 0, a capacitor if B > 0)."""

    resistance_ohm: np.ndarray
    reactance_ohm: np.ndarray
    inductance_h: np.ndarray
    capacitance_f: np.ndarray


def parallel_equivalent(freq_hz: ArrayLike, y: ArrayLike) -> ParallelEquivalent:
    """R_p = 1/G, X_p = −1/B; L_p = X_p/ω where B < 0, C_p = B/ω where B > 0."""
    w = 2.0 * np.pi * np.asarray(freq_hz, dtype=np.float64)
    yy = np.asarray(y, dtype=np.complex128)
    g, b = yy.real, yy.imag
    with np.errstate(divide="ignore", invalid="ignore"):
        rp = 1.0 / g
        xp = -1.0 / b
        ind = np.where(b < 0, xp / w, np.nan)
        cap = np.where(b > 0, b / w, np.nan)
    return ParallelEquivalent(rp, xp, ind, cap)


def insertion_loss_db(s21: ArrayLike) -> np.ndarray:
    """Insertion loss IL = −20·log10|S21| (positive for a lossy passive two-port)."""
    return -db20(s21)


def group_delay_s(freq_hz: ArrayLike, x: ArrayLike, aperture: int = 1) -> np.ndarray:
    """Group delay τ = −dφ/dω in seconds, from the unwrapped phase of ``x``.

    ``aperture=1`` differentiates point to point (``numpy.gradient``: central
    differences inside, one-sided at the ends). An odd ``aperture`` k ≥ 3 fits a
    straight line to the phase over k neighbouring points (windows shift inward at the
    ends) to tame the noise a derivative amplifies; that smoothing is common practice.
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    phi = np.unwrap(np.angle(np.asarray(x, dtype=np.complex128)))
    n = f.size
    if n < 2:
        raise MetricError("group delay needs at least 2 frequency points")
    if aperture < 1 or aperture % 2 == 0:
        raise MetricError(f"group delay aperture must be an odd number of points, got {aperture}")
    w = 2.0 * np.pi * f
    if aperture == 1:
        return -np.gradient(phi, w)
    if aperture > n:
        raise MetricError(f"group delay aperture {aperture} exceeds the {n} sweep points")
    half = aperture // 2
    start = np.clip(np.arange(n) - half, 0, n - aperture)
    idx = start[:, None] + np.arange(aperture)[None, :]
    ww = w[idx] - w[idx].mean(axis=1, keepdims=True)
    pp = phi[idx] - phi[idx].mean(axis=1, keepdims=True)
    slope = (ww * pp).sum(axis=1) / (ww * ww).sum(axis=1)
    return -slope
