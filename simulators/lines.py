"""Transmission-line and network helpers shared by the error box, devices and standards.

Formulas from Pozar, Microwave Engineering, 4th ed.: reflection from impedance (ch. 2),
a uniform line between reference impedances (ch. 2 and 4) and ABCD → S (ch. 4, table 4.2).
All functions take and return numpy arrays, one value per frequency.
"""

from __future__ import annotations

import numpy as np

NEPER_PER_DB = np.log(10.0) / 20.0


def reflection(z: np.ndarray | complex, zr: float) -> np.ndarray:
    """Γ = (Z − Zr)/(Z + Zr) (Pozar ch. 2)."""
    z = np.asarray(z, dtype=np.complex128)
    return (z - zr) / (z + zr)


def uniform_line(zc: np.ndarray | complex, gamma_l: np.ndarray,
                 zr: float) -> tuple[np.ndarray, np.ndarray]:
    """S11 (= S22) and S21 (= S12) of a line of impedance ``zc`` and propagation ``γl``.

    With Γ = (Zc − Zr)/(Zc + Zr) and P = e^{−γl}:
    S11 = Γ(1 − P²)/(1 − Γ²P²), S21 = P(1 − Γ²)/(1 − Γ²P²).
    """
    g = reflection(zc, zr)
    p = np.exp(-np.asarray(gamma_l, dtype=np.complex128))
    p2 = p * p
    den = 1.0 - g * g * p2
    return g * (1.0 - p2) / den, p * (1.0 - g * g) / den


def coax_gamma_l(freq_hz: np.ndarray, delay_s: float, loss_db_at_1ghz: float) -> np.ndarray:
    """γl of a coaxial line with one-way ``delay_s`` and skin-effect loss ∝ √f.

    ``loss_db_at_1ghz`` is the one-way insertion loss at 1 GHz (common practice for
    quoting cable loss); conductor loss grows with √f (Pozar ch. 2, coaxial line).
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    alpha_l = loss_db_at_1ghz * NEPER_PER_DB * np.sqrt(f / 1e9)
    return alpha_l + 1j * (2.0 * np.pi * f * delay_s)


def abcd_to_s(a: np.ndarray, b: np.ndarray, c: np.ndarray, d: np.ndarray, z0: float) -> np.ndarray:
    """S matrix (n, 2, 2) from ABCD parameters with equal real port impedances (Pozar table 4.2)."""
    den = a + b / z0 + c * z0 + d
    s = np.empty((np.shape(a)[0], 2, 2), dtype=np.complex128)
    s[:, 0, 0] = (a + b / z0 - c * z0 - d) / den
    s[:, 0, 1] = 2.0 * (a * d - b * c) / den
    s[:, 1, 0] = 2.0 / den
    s[:, 1, 1] = (-a + b / z0 - c * z0 + d) / den
    return s


def two_port(s11: np.ndarray, s21: np.ndarray, s12: np.ndarray | None = None,
             s22: np.ndarray | None = None) -> np.ndarray:
    """Stack four (n,) arrays into an (n, 2, 2) S matrix (reciprocal/symmetric by default)."""
    s11 = np.asarray(s11, dtype=np.complex128)
    out = np.empty((s11.shape[0], 2, 2), dtype=np.complex128)
    out[:, 0, 0] = s11
    out[:, 1, 0] = s21
    out[:, 0, 1] = s21 if s12 is None else s12
    out[:, 1, 1] = s11 if s22 is None else s22
    return out
