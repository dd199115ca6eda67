"""Coupled-resonator band-pass filter from a low-pass ladder prototype.

Prototype element values and the low-pass → band-pass mapping follow Pozar, Microwave
Engineering, 4th ed., ch. 8 (§8.3 maximally flat and equal-ripple prototypes, §8.4
band-pass transformation). The ladder starts with a shunt element: shunt prototype
capacitors become parallel LC resonators, series inductors become series LC resonators,
all tuned to ω0 = 2π·center. Finite unloaded Q adds R = ω0L/Q (series) or G = ω0C/Q (shunt).
"""

from __future__ import annotations

import math

import numpy as np

from simulators.lines import abcd_to_s


def butterworth_g(order: int) -> list[float]:
    """Maximally flat prototype g1..gN (g0 = g_{N+1} = 1): g_k = 2 sin((2k − 1)π/(2N))."""
    return [2.0 * math.sin((2 * k - 1) * math.pi / (2 * order)) for k in range(1, order + 1)]


def chebyshev_g(order: int, ripple_db: float) -> list[float]:
    """Equal-ripple prototype g1..gN for odd N (g_{N+1} = 1), Pozar §8.3 closed form."""
    beta = math.log(1.0 / math.tanh(ripple_db * math.log(10.0) / 40.0))  # L_Ar/17.37
    gam = math.sinh(beta / (2 * order))
    a = [math.sin((2 * k - 1) * math.pi / (2 * order)) for k in range(1, order + 1)]
    b = [gam**2 + math.sin(k * math.pi / order) ** 2 for k in range(1, order + 1)]
    g = [2.0 * a[0] / gam]
    for k in range(1, order):
        g.append(4.0 * a[k - 1] * a[k] / (b[k - 1] * g[k - 1]))
    return g


def bandpass_s(freq_hz: np.ndarray, center_hz: float, bandwidth_hz: float, order: int,
               ripple_db: float = 0.0, q: float = 0.0, z0: float = 50.0) -> np.ndarray:
    """S (n, 2, 2) of the band-pass ladder; ``q`` = 0 means lossless resonators.

    ``center_hz`` is the geometric centre √(f1·f2), ``bandwidth_hz`` = f2 − f1 (3 dB
    edges for a maximally flat response, ripple edges for an equal-ripple one).
    """
    g = chebyshev_g(order, ripple_db) if ripple_db > 0 else butterworth_g(order)
    w = 2.0 * np.pi * np.asarray(freq_hz, dtype=np.float64)
    w0 = 2.0 * np.pi * center_hz
    delta = bandwidth_hz / center_hz
    n = w.shape[0]
    a = np.ones(n, dtype=np.complex128)
    b = np.zeros(n, dtype=np.complex128)
    c = np.zeros(n, dtype=np.complex128)
    d = np.ones(n, dtype=np.complex128)
    for k, gk in enumerate(g):
        if k % 2 == 0:  # shunt parallel LC from a prototype shunt capacitor
            cap = gk / (w0 * delta * z0)
            ind = delta * z0 / (w0 * gk)
            loss = w0 * cap / q if q > 0 else 0.0
            y = loss + 1j * w * cap + 1.0 / (1j * w * ind)
            a, b, c, d = a + b * y, b, c + d * y, d
        else:  # series LC from a prototype series inductor
            ind = gk * z0 / (w0 * delta)
            cap = delta / (w0 * gk * z0)
            loss = w0 * ind / q if q > 0 else 0.0
            z = loss + 1j * w * ind + 1.0 / (1j * w * cap)
            a, b, c, d = a, a * z + b, c, c * z + d
    return abcd_to_s(a, b, c, d, z0)
