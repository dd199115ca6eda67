"""Closed-form reflection of a cascade of lossy line segments (tests only).

Each segment is the lossy transmission line of Pozar, Microwave Engineering, 4th ed.,
table 4.1 (ABCD: A = D = cosh(gamma l), B = Z sinh(gamma l), C = sinh(gamma l) / Z) with
gamma = alpha + j beta, beta = 2 pi f / (VF c0), alpha the loss in Np/m (frequency
independent here, so the expected peak levels are exact). The cascade ends in a load ZL;
Zin = (A ZL + B) / (C ZL + D) and S11 = (Zin - Z0) / (Zin + Z0). Written here on purpose,
independently of acquire.timedomain.
"""

from __future__ import annotations

import numpy as np

C0 = 299_792_458.0
NEPER_DB = 20.0 / np.log(10.0)  # dB per neper


def segment_abcd(f: np.ndarray, z: float, length: float, vf: float, loss_db_m: float):
    gamma = loss_db_m / NEPER_DB + 1j * 2.0 * np.pi * f / (C0 * vf)
    ch, sh = np.cosh(gamma * length), np.sinh(gamma * length)
    return np.array([[ch, z * sh], [sh / z, ch]]).transpose(2, 0, 1)


def line_s11(f: np.ndarray, segments: list[tuple[float, float]], z_load: complex,
             vf: float = 0.66, loss_db_m: float = 0.0, z0: float = 50.0) -> np.ndarray:
    """S11 of ``segments`` [(Z, length m), ...] in cascade, ended in ``z_load``."""
    f = np.asarray(f, dtype=np.float64)
    m = np.broadcast_to(np.eye(2, dtype=np.complex128), (f.size, 2, 2))
    for z, length in segments:
        m = m @ segment_abcd(f, z, length, vf, loss_db_m)
    zin = (m[:, 0, 0] * z_load + m[:, 0, 1]) / (m[:, 1, 0] * z_load + m[:, 1, 1])
    return (zin - z0) / (zin + z0)


def rho(z_from: float, z_to: float) -> float:
    """Reflection coefficient of a step from ``z_from`` to ``z_to`` (Pozar eq. 2.35)."""
    return (z_to - z_from) / (z_to + z_from)
