"""From the numbers of a Touchstone data section to complex matrices and noise data.

Pairs are read as the option line says (RI: real, imaginary; MA: magnitude, angle in
degrees; DB: 20·log10 magnitude, angle), per the Touchstone File Format Specification
2.0. Full matrices are row-major except 2-port version 1 files and version 2 files with
``[Two-Port Data Order] 21_12`` (column-major); upper/lower matrices are mirrored.
"""

from __future__ import annotations

import numpy as np

from .model import NoiseData


def network_matrices(values: np.ndarray, ports: int, fmt: str, *, column_major: bool,
                     matrix: str) -> np.ndarray:
    """One ``ports`` × ``ports`` complex matrix per data set (frequency in column 0)."""
    n = values.shape[0]
    a, b = values[:, 1::2], values[:, 2::2]
    if fmt == "RI":                     # pairs are (re, im) already: exact, keeps -0.0
        flat = np.ascontiguousarray(values[:, 1:]).view(np.complex128)
    else:
        mag = 10.0 ** (a / 20.0) if fmt == "DB" else a
        flat = mag * unit_phasor(b)
    if matrix == "full":
        out = flat.reshape(n, ports, ports)
        return np.ascontiguousarray(out.transpose(0, 2, 1)) if column_major else out
    rows, cols = np.tril_indices(ports) if matrix == "lower" else np.triu_indices(ports)
    out = np.zeros((n, ports, ports), dtype=np.complex128)
    out[:, rows, cols] = flat
    out[:, cols, rows] = flat
    return out


def noise_data(values: np.ndarray, rn_scale: float) -> NoiseData:
    """Noise lines (frequency, NFmin dB, |Γopt|, ∠Γopt, Rn) as ``NoiseData``."""
    return NoiseData(values[:, 0], values[:, 1], values[:, 2] * unit_phasor(values[:, 3]),
                     values[:, 4] * rn_scale)


def unit_phasor(degrees: np.ndarray) -> np.ndarray:
    """exp(j*degrees) with exact values at multiples of 90 degrees."""
    rad = np.deg2rad(degrees)
    out = np.cos(rad) + 1j * np.sin(rad)
    quarter = np.remainder(degrees, 90.0) == 0
    if quarter.any():
        k = np.remainder(degrees[quarter] // 90, 4).astype(int)
        out[quarter] = np.array([1, 1j, -1, -1j])[k]
    return out
