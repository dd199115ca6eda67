"""Network-parameter conversions (S <-> Z, Y, H, G) for real per-port references.

One formula covers all four: each port's "left" quantity (what the parameter matrix
produces) is a voltage or a current, and the "right" one is the other. With real
reference resistances R_k the pseudo-waves are V = sqrt(R)(a + b), I = (a - b)/sqrt(R)
(Kurokawa, "Power waves and the scattering matrix", IEEE Trans. MTT-13, 1965; for real
references power and pseudo-waves coincide). Writing left = Ka a + Kb b and
right = Ja a + Jb b (diagonal K, J) turns ``left = P right`` into

    S = (Kb - P Jb)^-1 (P Ja - Ka),        P = (Ka + Kb S)(Ja + Jb S)^-1.

Z: left V, right I. Y: left I, right V. H: (V1, I2) = H (I1, V2). G: (I1, V2) = G (V1, I2).
For one port and Z this is the familiar Gamma = (Z - R)/(Z + R) (Pozar, Microwave
Engineering, 4th ed., ch. 2).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

_LEFT_IS_VOLTAGE = {"Z": (True,), "Y": (False,), "H": (True, False), "G": (False, True)}


class SingularAt(np.linalg.LinAlgError):
    """The conversion matrix is singular at frequency index ``index``."""

    def __init__(self, index: int) -> None:
        super().__init__(f"singular matrix at point {index}")
        self.index = index


def _left_is_voltage(parameter: str, ports: int) -> np.ndarray:
    kinds = _LEFT_IS_VOLTAGE[parameter]
    if len(kinds) == 1:
        return np.full(ports, kinds[0])
    if ports != 2:
        raise ValueError(f"{parameter} parameters are defined for 2 ports, not {ports}")
    return np.array(kinds)


def _coefficients(parameter: str, z0: Sequence[float], ports: int):
    """Diagonals (ka, kb, ja, jb) of the left/right quantities in terms of a and b."""
    root = np.sqrt(np.broadcast_to(np.asarray(z0, dtype=np.float64), (ports,)))
    volt = _left_is_voltage(parameter, ports)
    ka = np.where(volt, root, 1 / root)
    kb = np.where(volt, root, -1 / root)
    ja = np.where(volt, 1 / root, root)
    jb = np.where(volt, -1 / root, root)
    return ka, kb, ja, jb


def _solve(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    try:
        return np.linalg.solve(a, b)
    except np.linalg.LinAlgError:
        singular = np.flatnonzero(np.linalg.matrix_rank(a) < a.shape[-1])
        raise SingularAt(int(singular[0]) if singular.size else 0) from None


def to_s(data: np.ndarray, parameter: str, z0: Sequence[float]) -> np.ndarray:
    """S-parameters (n, p, p) from S, Y, Z, H or G data (ohms/siemens) and real z0."""
    data = np.asarray(data, dtype=np.complex128)
    if parameter == "S":
        return data.copy()
    ports = data.shape[-1]
    ka, kb, ja, jb = _coefficients(parameter, z0, ports)
    return _solve(np.diag(kb) - data * jb, data * ja - np.diag(ka))


def from_s(s: np.ndarray, parameter: str, z0: Sequence[float]) -> np.ndarray:
    """Y, Z, H or G (ohms/siemens) from S-parameters (n, p, p) and real z0."""
    s = np.asarray(s, dtype=np.complex128)
    if parameter == "S":
        return s.copy()
    ports = s.shape[-1]
    ka, kb, ja, jb = _coefficients(parameter, z0, ports)
    left = np.diag(ka) + kb[:, None] * s
    right = np.diag(ja) + jb[:, None] * s
    # P = left @ right^-1  <=>  P^T = solve(right^T, left^T)
    return np.swapaxes(_solve(np.swapaxes(right, -1, -2), np.swapaxes(left, -1, -2)), -1, -2)


def normalisation(parameter: str, z0: Sequence[float], ports: int) -> np.ndarray:
    """Factor matrix f with stored_v1 = absolute * f for version 1 files.

    Version 1 stores voltages as V/sqrt(R) and currents as I*sqrt(R) (Z/R, Y*R for one
    reference; Touchstone 2.0 spec, option line). For unequal per-port references
    (version 1.1) the same rule gives z_ij = Z_ij / sqrt(R_i R_j) — an assumption, since
    no published example shows that case.
    """
    if parameter == "S":
        return np.ones((ports, ports))
    root = np.sqrt(np.broadcast_to(np.asarray(z0, dtype=np.float64), (ports,)))
    volt = _left_is_voltage(parameter, ports)
    left = np.where(volt, 1 / root, root)      # V/sqrt(R) or I*sqrt(R)
    right = np.where(volt, root, 1 / root)     # port k's other quantity, scaled alike
    return left[:, None] / right[None, :]
