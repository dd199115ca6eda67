"""Moving error terms onto another frequency grid, when a plan allows it.

Error terms rotate by 360°·Δf·τ per point (τ the round-trip delay behind them). Linear
complex interpolation across a phase step Δφ shrinks the midpoint by cos(Δφ/2):
10° → −0.033 dB, 30° → −0.30 dB, 90° → −3.0 dB. So each term first has a fitted delay
removed (a straight line through its unwrapped phase), is interpolated linearly in the
complex plane, and gets the delay back. Never extrapolates; steps above ``max_step_deg``
(about 10°) between the original points are flagged as coarse.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from acquire.calibration.methods import ErrorModel
from acquire.calibration.model import OnePortTerms, TransmissionTerms
from acquire.errors import CalError
from acquire.units import format_frequency

MAX_STEP_DEG = 10.0


def remove_delay(freq_hz: np.ndarray, term: np.ndarray) -> tuple[np.ndarray, float]:
    """(term with its fitted delay removed, that slope in rad/Hz)."""
    if term.size < 2 or not np.any(term):
        return term, 0.0
    slope = float(np.polyfit(freq_hz, np.unwrap(np.angle(term)), 1)[0])
    return term * np.exp(-1j * slope * freq_hz), slope


def max_step_deg(term: np.ndarray) -> float:
    """Largest phase step between neighbouring points, degrees (0 for zero terms)."""
    a, b = term[:-1], term[1:]
    nonzero = (a != 0) & (b != 0)
    if not nonzero.any():
        return 0.0
    return float(np.degrees(np.abs(np.angle(b[nonzero] / a[nonzero]))).max())


def interpolate_term(freq_hz: np.ndarray, term: np.ndarray, new_hz: np.ndarray
                     ) -> tuple[np.ndarray, float]:
    """One term on ``new_hz`` (delay removed, linear complex interpolation, delay restored)
    and the largest phase step (degrees) it had after delay removal."""
    flat, slope = remove_delay(freq_hz, np.asarray(term, np.complex128))
    re = np.interp(new_hz, freq_hz, flat.real)
    im = np.interp(new_hz, freq_hz, flat.imag)
    return (re + 1j * im) * np.exp(1j * slope * new_hz), max_step_deg(flat)


def interpolate_model(model: ErrorModel, new_hz: np.ndarray, *,
                      step_limit_deg: float = MAX_STEP_DEG) -> tuple[ErrorModel, dict[str, Any]]:
    """The model on ``new_hz`` plus a JSON-able report (max step, coarse flag, delays)."""
    f = model.freq_hz
    new = np.asarray(new_hz, np.float64)
    if f.size < 2:
        raise CalError("a single-point calibration cannot be interpolated")
    span = (f[-1] - f[0]) * 1e-12
    if new.min() < f[0] - span or new.max() > f[-1] + span:
        raise CalError(
            f"the sweep ({format_frequency(new.min())} to {format_frequency(new.max())}) goes "
            f"beyond the calibration ({format_frequency(f[0])} to {format_frequency(f[-1])}); "
            "a calibration is never extrapolated")
    steps: dict[str, float] = {}
    reflection, transmission = {}, {}
    for param, terms in model.reflection.items():
        out = {}
        for name, arr in terms.as_dict().items():
            out[name], steps[f"{param}.{name}"] = interpolate_term(f, arr, new)
        reflection[param] = OnePortTerms.from_terms(out)
    for param, terms in model.transmission.items():
        out = {}
        for name, arr in terms.as_dict().items():
            out[name], steps[f"{param}.{name}"] = interpolate_term(f, arr, new)
        transmission[param] = TransmissionTerms.from_terms(out)
    worst = max(steps.values(), default=0.0)
    report = {"from_points": int(f.size), "max_step_deg": worst,
              "coarse": bool(worst > step_limit_deg),
              "coarse_terms": sorted(k for k, v in steps.items() if v > step_limit_deg)}
    return ErrorModel(model.method, new, reflection, transmission), report
