"""Windows for the inverse transform, with their sidelobe level measured, not assumed.

A window tapers the sweep before the inverse FFT: it lowers the sidelobes that a big
reflection throws across the distance axis (so a small fault beside it stays visible) at
the price of a wider main lobe (coarser resolution). Names are ours:

- ``none``: rectangular, highest sidelobe -13.3 dB (Harris 1978, table 1);
- ``hann``: -31.5 dB (Harris 1978);
- ``kaiser-<beta>``: Kaiser-Bessel with shape ``beta`` from 0 to 20; ``kaiser-6`` about
  -44 dB and ``kaiser-13`` about -90 dB (values from memory, see
  shared reference note on time domain).

The stated sidelobe level and main-lobe width of every window are computed here from the
window's own zero-padded transform, so what the output states is what the transform did.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

WINDOW_NAMES = ("none", "hann", "kaiser-6", "kaiser-13")
DEFAULT_WINDOW = "kaiser-6"
_KAISER = re.compile(r"^kaiser-(\d+(?:\.\d+)?)$")
_MEASURE_PAD = 64  # zero-padding factor used to measure a window's transform
MEASURE_MAX_POINTS = 1024


class WindowError(ValueError):
    """An unknown window name (the caller adds the file or option at fault)."""


@dataclass(frozen=True)
class WindowInfo:
    """A window's name and its measured figures."""

    name: str
    sidelobe_db: float  # highest sidelobe relative to the main lobe (negative dB)
    mainlobe_6db_ratio: float  # -6 dB main-lobe width relative to the rectangular window

    def to_dict(self) -> dict[str, float | str]:
        return {
            "name": self.name,
            "sidelobe_db": self.sidelobe_db,
            "mainlobe_6db_ratio": self.mainlobe_6db_ratio,
        }


def check_window(name: str) -> str:
    """Return ``name`` if it is a known window, else raise ``WindowError``."""
    match = _KAISER.match(name)
    if name in ("none", "hann") or (match and float(match.group(1)) <= 20.0):
        return name
    raise WindowError(
        f"unknown window {name!r}; use none, hann or kaiser-<beta> with beta 0..20 "
        "(e.g. kaiser-6, kaiser-13)"
    )


def symmetric(name: str, n: int) -> np.ndarray:
    """The window of ``n`` points, peak 1 at the centre (symmetric)."""
    check_window(name)
    if n <= 1 or name == "none":
        return np.ones(n)
    if name == "hann":
        # Hann without its two zero end points: every measured point keeps some weight.
        return np.hanning(n + 2)[1:-1]
    beta = float(name.split("-", 1)[1])
    return np.kaiser(n, beta)


def half(name: str, n: int) -> np.ndarray:
    """The right half of a symmetric window of ``2n - 1`` points: DC first (low-pass)."""
    return symmetric(name, 2 * n - 1)[n - 1:]


def window_info(name: str, points: int = 256) -> WindowInfo:
    """Measure a window's highest sidelobe and -6 dB main-lobe width at ``points``.

    Long windows are measured at 1024 points: the figures have settled by then.
    """
    return _measured(name, int(min(max(points, 8), MEASURE_MAX_POINTS)))


@lru_cache(maxsize=64)
def _measured(name: str, n: int) -> WindowInfo:
    ratio_6db = _width_6db(symmetric(name, n)) / _width_6db(np.ones(n))
    return WindowInfo(name, _sidelobe_db(symmetric(name, n)), float(ratio_6db))


def _kernel_db(w: np.ndarray) -> np.ndarray:
    """|transform| of the window in dB relative to its peak, one side, finely sampled."""
    spectrum = np.abs(np.fft.rfft(w, _MEASURE_PAD * w.size))
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(spectrum / spectrum[0])


def _sidelobe_db(w: np.ndarray) -> float:
    k = _kernel_db(w)
    rising = np.flatnonzero(np.diff(k) > 0)
    if rising.size == 0:
        return float("-inf")
    first_null = int(rising[0])
    return float(np.max(k[first_null:]))


def _width_6db(w: np.ndarray) -> float:
    k = _kernel_db(w)
    below = int(np.argmax(k < -6.0206))
    # Interpolate the crossing between the two samples around -6 dB.
    a, b = k[below - 1], k[below]
    frac = (a + 6.0206) / (a - b)
    return 2.0 * (below - 1 + frac)
