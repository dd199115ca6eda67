"""Named quantities a limit can apply to, and how each is computed from a sweep.

One table serves masks, checks and plots, so a quantity means the same thing
everywhere. Sign conventions: ``return_loss`` is positive dB (−20·log10|Γ|);
``magnitude_db`` is 20·log10|Sij| (negative for a passive device); ``phase`` is wrapped
to (−180°, 180°]; ``group_delay`` is −dφ/dω in seconds.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from acquire.metrics import conversions as cv
from acquire.sweep import Sweep


@dataclass(frozen=True)
class QuantityInfo:
    """How to read, write and label one quantity."""

    name: str
    label: str  # axis label, ASCII
    unit: str  # display unit ("" for SWR)
    unit_kind: str | None  # acquire.units kind for limits in files; None = plain number
    reflection_only: bool  # needs Sii (SWR, return loss, R, X)


QUANTITIES: dict[str, QuantityInfo] = {
    q.name: q
    for q in (
        QuantityInfo("swr", "SWR", "", None, True),
        QuantityInfo("return_loss", "return loss (dB, positive)", "dB", "decibel", True),
        QuantityInfo("magnitude_db", "magnitude (dB)", "dB", "decibel", False),
        QuantityInfo("phase", "phase (deg)", "deg", "angle", False),
        QuantityInfo("group_delay", "group delay (s)", "s", "time", False),
        QuantityInfo("resistance", "resistance R (ohm)", "ohm", "impedance", True),
        QuantityInfo("reactance", "reactance X (ohm)", "ohm", "impedance", True),
    )
}


def trace(sweep: Sweep, parameter: str, quantity: str, aperture: int = 1) -> np.ndarray:
    """The quantity on the sweep grid, for interpolation between points.

    Phase is returned *unwrapped* here so that interpolation never jumps across a
    ±180° wrap; call ``finish`` on interpolated values to wrap it again.
    """
    s = sweep.param(parameter)
    z0 = sweep.z0[int(parameter[1]) - 1]
    if quantity == "swr":
        return cv.swr(s)
    if quantity == "return_loss":
        return cv.return_loss_db(s)
    if quantity == "magnitude_db":
        return cv.db20(s)
    if quantity == "phase":
        return cv.phase_deg(s, unwrap=True)
    if quantity == "group_delay":
        return cv.group_delay_s(sweep.freq_hz, s, aperture)
    if quantity == "resistance":
        return cv.impedance(s, z0).real
    if quantity == "reactance":
        return cv.impedance(s, z0).imag
    raise KeyError(quantity)


def finish(quantity: str, values: np.ndarray) -> np.ndarray:
    """Bring interpolated trace values to the quantity's display form."""
    if quantity == "phase":
        return cv.phase_deg(np.exp(1j * np.radians(values)))
    return values


def format_value(quantity: str, value: float) -> str:
    """Short ASCII text for one value of a quantity, with its unit."""
    if quantity == "swr":
        return f"{value:.3f}"
    if quantity in ("return_loss", "magnitude_db"):
        return f"{value:.2f} dB"
    if quantity == "phase":
        return f"{value:.1f} deg"
    if quantity == "group_delay":
        for factor, unit in ((1e-9, "ns"), (1e-12, "ps")):
            if abs(value) >= factor or unit == "ps":
                return f"{value / factor:.4g} {unit}"
    return f"{value:.2f} ohm"
