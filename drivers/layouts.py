"""How a trace's values are laid out per point, and their conversion to complex numbers.

Every layout carries two values per point:

- ``re_im``   real part, imaginary part (the usual SCPI interleaving; a convention, not
  something SCPI guarantees, so each dialect states it);
- ``db_deg``  20*log10|S| in dB, phase in degrees;
- ``lin_deg`` |S| (linear magnitude), phase in degrees.

dB is a wave-amplitude ratio: |S| = 10**(dB/20) (Pozar, Microwave Engineering, 4th ed.,
ch. 2: S11 in dB = 20*log10|Gamma|). Phase in degrees: S = |S| * e**(j*phi).
"""

from __future__ import annotations

import numpy as np

LAYOUTS: tuple[str, ...] = ("re_im", "db_deg", "lin_deg")
VALUES_PER_POINT = 2


def to_complex(values: np.ndarray, layout: str, out: np.ndarray | None = None) -> np.ndarray:
    """Convert a flat float64 array of ``2n`` values into ``n`` complex128 points.

    ``out`` (complex128, shape (n,), may be a strided column) receives the result.
    """
    if layout not in LAYOUTS:
        raise ValueError(f"unknown layout {layout!r}; known: {', '.join(LAYOUTS)}")
    if values.ndim != 1 or values.size % VALUES_PER_POINT:
        raise ValueError(f"{layout} needs pairs of values, got shape {values.shape}")
    first = values[0::2]
    second = values[1::2]
    if out is None:
        out = np.empty(first.size, dtype=np.complex128)
    if layout == "re_im":
        out.real = first
        out.imag = second
    else:
        magnitude = 10.0 ** (first / 20.0) if layout == "db_deg" else first
        phase = np.deg2rad(second)
        out.real = magnitude * np.cos(phase)
        out.imag = magnitude * np.sin(phase)
    return out


def from_complex(points: np.ndarray, layout: str) -> np.ndarray:
    """The inverse of ``to_complex``: ``n`` complex points as ``2n`` interleaved values."""
    if layout not in LAYOUTS:
        raise ValueError(f"unknown layout {layout!r}; known: {', '.join(LAYOUTS)}")
    points = np.asarray(points, dtype=np.complex128).ravel()
    values = np.empty(points.size * 2, dtype=np.float64)
    if layout == "re_im":
        values[0::2], values[1::2] = points.real, points.imag
    else:
        magnitude = np.abs(points)
        values[0::2] = 20.0 * np.log10(magnitude) if layout == "db_deg" else magnitude
        values[1::2] = np.rad2deg(np.angle(points))
    return values
