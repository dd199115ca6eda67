"""How a trace's values are laid out per point, and their conversion to complex numbers.

Every layout carries two values per point:

- ``re_im``   real part, imaginary part (the usual SCPI interleaving; a convention, not
  something SCPI guarantees, so each dialect states it);
- ``db_deg``  20*log10|S| in dB, phase in degrees;
- ``lin_deg`` |S| (linear magnitude), phase in degrees.

A ``freq_`` prefix (``freq_re_im``, ``freq_db_deg``, ``freq_lin_deg``) means each point
starts with its frequency: three values per point, the first being the axis.

dB is a wave-amplitude ratio: |S| = 10**(dB/20) (Pozar, Microwave Engineering, 4th ed.,
ch. 2: S11 in dB = 20*log10|Gamma|). Phase in degrees: S = |S| * e**(j*phi).
"""

from __future__ import annotations

import numpy as np

BASE_LAYOUTS: tuple[str, ...] = ("re_im", "db_deg", "lin_deg")
LAYOUTS: tuple[str, ...] = (*BASE_LAYOUTS, *(f"freq_{name}" for name in BASE_LAYOUTS))
VALUES_PER_POINT = 2
FREQ_PREFIX = "freq_"


def values_per_point(layout: str) -> int:
    """2 for a pair per point, 3 when each point starts with its frequency."""
    return VALUES_PER_POINT + 1 if layout.startswith(FREQ_PREFIX) else VALUES_PER_POINT


def split_frequency(values: np.ndarray, layout: str) -> tuple[np.ndarray | None, np.ndarray, str]:
    """``(frequencies or None, the value pairs, the pair layout)`` of a flat trace."""
    if not layout.startswith(FREQ_PREFIX):
        return None, values, layout
    if values.ndim != 1 or values.size % 3:
        raise ValueError(f"{layout} needs triples of values, got shape {values.shape}")
    triples = values.reshape(-1, 3)
    return triples[:, 0].copy(), triples[:, 1:].ravel(), layout[len(FREQ_PREFIX):]


def to_complex(values: np.ndarray, layout: str, out: np.ndarray | None = None) -> np.ndarray:
    """Convert a flat float64 array of ``2n`` values into ``n`` complex128 points.

    ``out`` (complex128, shape (n,), may be a strided column) receives the result. A
    ``freq_`` layout takes ``3n`` values and ignores the frequencies.
    """
    _freq, values, layout = split_frequency(values, layout) if layout in LAYOUTS else (
        None, values, layout)
    if layout not in BASE_LAYOUTS:
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
    if layout not in BASE_LAYOUTS:
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
