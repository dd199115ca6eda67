"""Actual reflection (and thru transmission) of calibration standards from their models.

Each standard is an offset line (one-way delay, offset loss, offset impedance) ending in
a termination: an open with a fringing capacitance polynomial, a short with an inductance
polynomial, a load of given impedance, or (for a thru) the second port. Offset line in the
low-loss coaxial approximation (loss grows with sqrt(f); not valid for waveguide):

    s   = sqrt(f / 1 GHz)
    αl  = L_off·τ/(2·Z_off)·s            βl = 2πfτ + αl            γl = αl + jβl
    Z_c = Z_off + (1 − j)·L_off/(4πf)·s

and the termination seen through it, referenced to the system impedance Z_r:

    Γ1 = (Z_c − Z_r)/(Z_c + Z_r),  Γ_T = (Z_T − Z_r)/(Z_T + Z_r),  E = exp(−2γl)
    Γ  = [Γ1(1 − E − Γ1Γ_T) + E·Γ_T] / [1 − Γ1(E·Γ1 + Γ_T(1 − E))]

Sources: line equations, Pozar, Microwave Engineering, 4th ed., ch. 2; the offset-line
model as in the scikit-rf documentation example "SOLT Calibration Standards Creation".
Conventions: e^{+jωt}; a one-way delay τ multiplies a wave by e^{−jωτ}.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

KINDS = ("open", "short", "load", "thru")


@dataclass(frozen=True)
class Offset:
    """The offset line in front of a termination (all SI: s, ohm/s, ohm)."""

    delay_s: float = 0.0
    loss_ohm_per_s: float = 0.0
    z0_ohm: float = 50.0


@dataclass(frozen=True)
class Standard:
    """One calibration standard model, in SI units.

    ``capacitance_f`` holds C0..C3 in F, F/Hz, F/Hz², F/Hz³ (open); ``inductance_h``
    holds L0..L3 in H, H/Hz, H/Hz², H/Hz³ (short); ``impedance_ohm`` is the load.
    """

    name: str
    kind: str
    offset: Offset = Offset()
    capacitance_f: tuple[float, float, float, float] = (0.0, 0.0, 0.0, 0.0)
    inductance_h: tuple[float, float, float, float] = (0.0, 0.0, 0.0, 0.0)
    impedance_ohm: complex = 50.0

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise ValueError(f"standard kind must be one of {', '.join(KINDS)}, got {self.kind!r}")

    def reflection(self, freq_hz: np.ndarray, z_ref_ohm: float) -> np.ndarray:
        """Actual reflection coefficient at every frequency (complex128, shape of freq)."""
        if self.kind == "thru":
            raise ValueError(f"standard '{self.name}' is a thru; it has no reflection model")
        f = _positive(freq_hz)
        return through_offset(termination_gamma(self, f, z_ref_ohm), f, self.offset, z_ref_ohm)

    def thru_s(self, freq_hz: np.ndarray, z_ref_ohm: float) -> tuple[np.ndarray, np.ndarray]:
        """(S11 = S22, S21 = S12) of a thru standard: a plain (symmetrical) offset line."""
        if self.kind != "thru":
            raise ValueError(f"standard '{self.name}' is a {self.kind}, not a thru")
        f = _positive(freq_hz)
        return line_s(f, self.offset, z_ref_ohm)


def offset_line(freq_hz: np.ndarray, offset: Offset) -> tuple[np.ndarray, np.ndarray]:
    """Propagation γl (Np + j rad) and characteristic impedance Z_c of an offset line."""
    f = _positive(freq_hz)
    s = np.sqrt(f / 1e9)
    alpha_l = offset.loss_ohm_per_s * offset.delay_s / (2.0 * offset.z0_ohm) * s
    beta_l = 2.0 * np.pi * f * offset.delay_s + alpha_l
    z_c = offset.z0_ohm + (1.0 - 1.0j) * offset.loss_ohm_per_s / (4.0 * np.pi * f) * s
    return alpha_l + 1j * beta_l, z_c


def termination_gamma(std: Standard, freq_hz: np.ndarray, z_ref_ohm: float) -> np.ndarray:
    """Γ_T of the bare termination referenced to ``z_ref_ohm`` (no offset line)."""
    f = np.asarray(freq_hz, dtype=np.float64)
    w = 2.0 * np.pi * f
    if std.kind == "open":
        c = np.polynomial.polynomial.polyval(f, std.capacitance_f)
        # Z_T = 1/(jωC)  ->  Γ_T = (1 − jωC·Z_r)/(1 + jωC·Z_r); finite for C = 0.
        x = 1j * w * c * z_ref_ohm
        return (1.0 - x) / (1.0 + x)
    if std.kind == "short":
        zl = 1j * w * np.polynomial.polynomial.polyval(f, std.inductance_h)
        return (zl - z_ref_ohm) / (zl + z_ref_ohm)
    if std.kind == "load":
        z = complex(std.impedance_ohm)
        return np.full(f.shape, (z - z_ref_ohm) / (z + z_ref_ohm), dtype=np.complex128)
    raise ValueError(f"standard '{std.name}' ({std.kind}) has no termination")


def through_offset(
    gamma_t: np.ndarray, freq_hz: np.ndarray, offset: Offset, z_ref_ohm: float
) -> np.ndarray:
    """A termination Γ_T (referenced to Z_r) seen through the offset line."""
    if offset.delay_s == 0.0:  # no line: a loss entry with zero delay means nothing
        return np.asarray(gamma_t, dtype=np.complex128)
    gl, z_c = offset_line(freq_hz, offset)
    g1 = (z_c - z_ref_ohm) / (z_c + z_ref_ohm)
    e = np.exp(-2.0 * gl)
    num = g1 * (1.0 - e - g1 * gamma_t) + e * gamma_t
    den = 1.0 - g1 * (e * g1 + gamma_t * (1.0 - e))
    return num / den


def line_s(freq_hz: np.ndarray, offset: Offset, z_ref_ohm: float) -> tuple[np.ndarray, np.ndarray]:
    """S11 (= S22) and S21 (= S12) of an offset line between two Z_r ports (Pozar ch. 2)."""
    f = np.asarray(freq_hz, dtype=np.float64)
    if offset.delay_s == 0.0:
        return np.zeros(f.shape, np.complex128), np.ones(f.shape, np.complex128)
    gl, z_c = offset_line(f, offset)
    g1 = (z_c - z_ref_ohm) / (z_c + z_ref_ohm)
    e = np.exp(-2.0 * gl)
    den = 1.0 - g1 * g1 * e
    return g1 * (1.0 - e) / den, (1.0 - g1 * g1) * np.exp(-gl) / den


def _positive(freq_hz: np.ndarray) -> np.ndarray:
    f = np.asarray(freq_hz, dtype=np.float64)
    if f.size and not np.all(f > 0):
        raise ValueError("standard models need frequencies above 0 Hz")
    return f
