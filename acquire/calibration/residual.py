"""Residual errors after a one-port calibration, and check-standard verification.

A calibration maps raw readings onto the standards' *models*; where the actual standards
differ from their models, corrected readings keep small effective error terms. The map
from a true reflection to its corrected reading is itself a 3-term model R with
R(Γ_actual,k) = Γ_model,k for each standard k, so it is solved exactly like a calibration
(ideals = actual standards, readings = models). Its terms are the effective directivity
(mostly the load's error), source match and tracking (mostly open/short errors); to first
order a corrected reading is off by at most

    |ΔΓ| ≲ δ_D + δ_T·|Γ| + δ_S·|Γ|²

(residual-error model as in EURAMET cg-12, "Guidelines on the Evaluation of Vector Network
Analysers", v3.0, 2018). Verification measures a device not used in the cal (a 25 Ω or
100 Ω mismatch, an offset short) and compares it with its reference value; re-measuring a
cal standard only returns its model and tests nothing but repeatability.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from acquire.calibration.model import solve_one_port
from acquire.units import format_frequency

# Common practice, illustrative: a good coaxial load is within about 40 dB return loss of
# its model and open/short phase within about a degree; not taken from any kit's data.
DEFAULT_LOAD_ERROR = 0.01
DEFAULT_PHASE_ERROR_DEG = 1.0


@dataclass(frozen=True)
class ResidualEstimate:
    """Worst effective error terms after calibration (linear magnitudes)."""

    directivity: float
    source_match: float
    tracking: float  # |T − 1|
    assumptions: str = ""

    @classmethod
    def from_db(cls, directivity_db: float, source_match_db: float, tracking_db: float,
                assumptions: str = "") -> ResidualEstimate:
        """From dB figures: directivity and source match as −dB levels, tracking as ±dB."""
        return cls(10 ** (directivity_db / 20), 10 ** (source_match_db / 20),
                   10 ** (tracking_db / 20) - 1.0, assumptions)

    @property
    def directivity_db(self) -> float:
        return _db(self.directivity)

    @property
    def source_match_db(self) -> float:
        return _db(self.source_match)

    @property
    def tracking_db(self) -> float:
        return float(20 * np.log10(1.0 + self.tracking))

    def reading_error(self, gamma_abs: np.ndarray | float) -> np.ndarray:
        """First-order bound on |ΔΓ| of a corrected reading of magnitude ``gamma_abs``."""
        g = np.asarray(gamma_abs, np.float64)
        return self.directivity + self.tracking * g + self.source_match * g * g

    def lines(self) -> list[str]:
        """Plain-words summary for the end of a calibration."""
        out = [f"effective directivity {self.directivity_db:.1f} dB",
               f"effective source match {self.source_match_db:.1f} dB",
               f"effective tracking error {self.tracking:.4f} (±{self.tracking_db:.3f} dB)"]
        if self.assumptions:
            out.append(f"(estimated assuming {self.assumptions})")
        return out

    def as_dict(self) -> dict[str, Any]:
        return {**asdict(self), "directivity_db": self.directivity_db,
                "source_match_db": self.source_match_db, "tracking_db": self.tracking_db}


def estimate_residuals(freq_hz: np.ndarray, models: Mapping[str, np.ndarray], *,
                       load_error: float = DEFAULT_LOAD_ERROR,
                       phase_error_deg: float = DEFAULT_PHASE_ERROR_DEG,
                       magnitude_error: float = 0.0, max_points: int = 101
                       ) -> ResidualEstimate:
    """Worst residual terms when the actual open, short and load differ from ``models``.

    ``models`` holds the open, short and load reflections (F,). The load may be off by
    up to ``load_error`` (any phase), the open and short by ``phase_error_deg`` in phase
    and ``magnitude_error`` (relative) in magnitude. Corner cases of those deviations are
    solved in one batch on at most ``max_points`` frequencies of the grid.
    """
    freq = np.asarray(freq_hz, np.float64)
    idx = np.unique(np.linspace(0, freq.size - 1, min(max_points, freq.size)).round().astype(int))
    go, gs, gl = (np.asarray(models[k], np.complex128)[idx] for k in ("open", "short", "load"))
    phi = np.exp(2j * np.pi * np.arange(8) / 8)
    rot = np.exp(1j * np.radians(phase_error_deg) * np.array([1.0, -1.0]))
    mag = np.array([1.0 + magnitude_error, 1.0 - magnitude_error])
    swing = (rot[:, None] * mag[None, :]).ravel()  # (4,)
    co, cs, cl = np.meshgrid(swing, swing, load_error * phi, indexing="ij")
    co, cs, cl = co.ravel()[:, None], cs.ravel()[:, None], cl.ravel()[:, None]  # (C, 1)
    actual = np.stack([(go * co).ravel(), (gs * cs).ravel(), (gl + cl).ravel()], axis=1)
    model = np.stack([np.broadcast_to(g, (co.shape[0], g.size)).ravel() for g in (go, gs, gl)],
                     axis=1)
    fit = solve_one_port(model, actual).terms
    what = (f"load error ≤ {_db(load_error):.0f} dB, open/short phase within "
            f"±{phase_error_deg:g}°" + (f" and ±{100 * magnitude_error:g} %" if magnitude_error
                                         else ""))
    return ResidualEstimate(float(np.abs(fit.directivity).max()),
                            float(np.abs(fit.source_match).max()),
                            float(np.abs(fit.reflection_tracking - 1.0).max()), what)


def return_loss_error_range(margin_db: float) -> tuple[float, float]:
    """Range of the return-loss reading error (dB) when effective directivity is
    ``margin_db`` below the device's reflection: (−20·log10(1 + x), −20·log10(1 − x)),
    x = 10^(−margin/20)."""
    x = 10 ** (-margin_db / 20)
    return float(-20 * np.log10(1 + x)), float(-20 * np.log10(1 - x))


@dataclass(frozen=True)
class Verification:
    """Outcome of measuring a check standard against its reference."""

    name: str
    passed: bool
    worst_error: float
    worst_hz: float
    allowed: float
    fraction_over: float
    message: str

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


def check_tolerance(reference: np.ndarray, estimate: ResidualEstimate,
                    repeatability: float = 0.0) -> np.ndarray:
    """Allowed |Γ_meas − Γ_ref| per point: residual reading error plus repeatability."""
    return estimate.reading_error(np.abs(reference)) + repeatability


def verify_check_standard(freq_hz: np.ndarray, corrected: np.ndarray, reference: np.ndarray,
                          tolerance: float | np.ndarray, *, name: str = "check standard",
                          max_fraction: float = 0.0) -> Verification:
    """Compare a corrected check-standard reading with its reference within ``tolerance``."""
    freq = np.asarray(freq_hz, np.float64)
    err = np.abs(np.asarray(corrected, np.complex128) - np.asarray(reference, np.complex128))
    tol = np.broadcast_to(np.asarray(tolerance, np.float64), err.shape)
    over = ~(err <= tol)
    fraction = float(over.mean())
    k = int(np.argmax(np.where(np.isfinite(err), err - tol, np.inf)))
    passed = fraction <= max_fraction
    at = format_frequency(float(freq[k]))
    if passed:
        message = (f"{name} agrees with its reference within {float(err.max()):.4f} "
                   f"(allowed {float(tol[k]):.4f} at {at})")
    else:
        message = (f"{name} is off by {float(err[k]):.4f} at {at} (allowed {float(tol[k]):.4f}): "
                   "the calibration or the check connection is bad; repeat the calibration")
    return Verification(name, passed, float(err[k]), float(freq[k]), float(tol[k]), fraction,
                        message)


def _db(x: float) -> float:
    return float(20 * np.log10(max(x, 1e-300)))
