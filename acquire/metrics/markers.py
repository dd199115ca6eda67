"""Values between sweep points: linear interpolation and markers."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from acquire.metrics import conversions as cv
from acquire.metrics.errors import MetricError
from acquire.units import format_frequency


def interpolate_at(freq_hz: ArrayLike, values: ArrayLike, at_hz: ArrayLike) -> np.ndarray:
    """Linear interpolation of a real or complex trace at frequencies inside the sweep.

    Complex traces are interpolated on real and imaginary parts (not magnitude and
    phase), which is exact for a straight line in the complex plane.
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    v = np.asarray(values)
    at = np.asarray(at_hz, dtype=np.float64)
    if f.size == 0:
        raise MetricError("cannot interpolate an empty sweep")
    outside = (at < f[0]) | (at > f[-1]) | np.isnan(at)
    if outside.any():
        bad = float(np.atleast_1d(at)[np.atleast_1d(outside)][0])
        raise MetricError(
            f"{format_frequency(bad)} lies outside the sweep "
            f"{format_frequency(f[0])} to {format_frequency(f[-1])}"
        )
    if np.iscomplexobj(v):
        return np.interp(at, f, v.real) + 1j * np.interp(at, f, v.imag)
    return np.interp(at, f, v)


@dataclass(frozen=True)
class Marker:
    """One S-parameter value at one frequency, with the usual readouts."""

    freq_hz: float
    value: complex
    z0: float = 50.0

    @property
    def db(self) -> float:
        return float(cv.db20(self.value))

    @property
    def phase_deg(self) -> float:
        return float(cv.phase_deg(self.value))

    @property
    def swr(self) -> float:
        return float(cv.swr(self.value))

    @property
    def return_loss_db(self) -> float:
        return float(cv.return_loss_db(self.value))

    @property
    def impedance(self) -> complex:
        return complex(cv.impedance(self.value, self.z0))

    @property
    def admittance(self) -> complex:
        return complex(cv.admittance(self.value, self.z0))

    def label(self) -> str:
        """Plain-ASCII one-liner for a reflection marker: f, R + jX, SWR."""
        z = self.impedance
        sign = "+" if z.imag >= 0 else "-"
        return (
            f"{format_frequency(self.freq_hz)}  {z.real:.1f} {sign} j{abs(z.imag):.1f} ohm"
            f"  SWR {self.swr:.2f}"
        )


def marker(freq_hz: ArrayLike, values: ArrayLike, at_hz: float, z0: float = 50.0) -> Marker:
    """A marker at any frequency inside the sweep (value interpolated linearly)."""
    value = complex(interpolate_at(freq_hz, np.asarray(values, dtype=np.complex128), at_hz))
    return Marker(float(at_hz), value, z0)
