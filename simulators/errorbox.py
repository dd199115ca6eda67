"""The analyzer's systematic errors: two test ports, their test cables and the 12-term model.

Each port has raw terms at its connector (directivity, source match, load match, tracking,
all smooth functions of frequency with some ripple, invented but plausible: directivity
around −32 dB, source match around −22 dB). A lossy, slightly mismatched test cable
(≈ 1 m, 5 ns, loss ∝ √f) moves them to the reference plane by two-port cascade; an optional
fixture disturbance (``Fixture``) is cascaded the same way at port 1.

The measured S-parameters follow the 12-term model (forward e00, e11, e10e01, e10e32, e22,
e30; reverse e33', e22', e23'e32', e23'e01', e11', e03') as written in R. B. Marks,
"Formulations of the Basic Vector Network Analyzer Error Model including Switch-Terms",
50th ARFTG Digest, 1997, and Kruppa and Sodomsky, IEEE T-MTT 19(1), 1971:

    S11m = e00 + e10e01(S11 − e22ΔS)/D_f      S21m = e30 + e10e32·S21/D_f
    S22m = e33' + e23'e32'(S22 − e11'ΔS)/D_r  S12m = e03' + e23'e01'·S12/D_r
    D_f = 1 − e11S11 − e22S22 + e11e22ΔS,     D_r = 1 − e11'S11 − e22'S22 + e11'e22'ΔS

``error_terms`` returns them under the keys e00, e11, e10e01, e10e32, e22, e30, e33r, e22r,
e23e32r, e23e01r, e11r, e03r ("r" = primed, reverse).

The box is physical: each port is an 8-term error two-port and the switch, seen from the
terminated port's receiver, reflects Γf = a2/b2 (port 1 driving) or Γr = a1/b1 (port 2
driving). A port's load match then differs from its source match by the switch
(Marks 1997): e22 = e22' + e23'e32'·Γf/(1 − e33'·Γf), and the reverse tracking obeys
e10e32·(1 − e33'Γf) · e23'e01'·(1 − e00Γr) = e10e01 · e23'e32'. ``switch_terms`` gives
Γf and Γr, which a calibration with an unknown thru needs.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from simulators.lines import coax_gamma_l, uniform_line

TERM_NAMES = ("e00", "e11", "e10e01", "e10e32", "e22", "e30",
              "e33r", "e22r", "e23e32r", "e23e01r", "e11r", "e03r")


@dataclass(frozen=True)
class PortHardware:
    """One test port at its connector plus its test cable (invented, plausible values)."""

    directivity_db: float = -32.0
    source_match_db: float = -22.0
    load_match_db: float = -19.0
    tracking_db: float = -0.8
    tracking_slope_db_per_ghz: float = -0.12
    internal_delay_s: float = 0.8e-9
    ripple: float = 0.35
    ripple_period_hz: float = 1.3e9
    phase_rad: float = 0.3
    cable_delay_s: float = 5.0e-9
    cable_loss_db_at_1ghz: float = 0.40
    cable_z_ohm: float = 50.6


PORT1 = PortHardware()
PORT2 = PortHardware(directivity_db=-30.0, source_match_db=-20.5, load_match_db=-18.0,
                     tracking_db=-1.1, internal_delay_s=0.9e-9, ripple_period_hz=1.7e9,
                     phase_rad=1.4, cable_delay_s=2.6e-9, cable_loss_db_at_1ghz=0.28,
                     cable_z_ohm=49.6)
ISOLATION_DB = -100.0


@dataclass(frozen=True)
class PortTerms:
    """Terms of one port at some plane, arrays (n,).

    ``directivity``, ``source_match``, ``tracking`` (e10e01-like product) apply when the
    port drives; ``one_way`` is the source-path factor (e10-like); ``load_match`` and
    ``receive`` (e32-like) apply when the port terminates and receives.
    """

    directivity: np.ndarray
    source_match: np.ndarray
    tracking: np.ndarray
    one_way: np.ndarray
    load_match: np.ndarray
    receive: np.ndarray

    def through(self, f11: np.ndarray, f21: np.ndarray, f22: np.ndarray) -> PortTerms:
        """The terms seen one reciprocal two-port further out (f11 faces the port)."""
        den_s = 1.0 - self.source_match * f11
        den_l = 1.0 - self.load_match * f11
        return PortTerms(
            directivity=self.directivity + self.tracking * f11 / den_s,
            source_match=f22 + f21 * f21 * self.source_match / den_s,
            tracking=self.tracking * f21 * f21 / (den_s * den_s),
            one_way=self.one_way * f21 / den_s,
            load_match=f22 + f21 * f21 * self.load_match / den_l,
            receive=self.receive * f21 / den_l,
        )


def connector_terms(hw: PortHardware, freq_hz: np.ndarray) -> PortTerms:
    """Raw terms of a port at its own connector (before the cable)."""
    f = np.asarray(freq_hz, dtype=np.float64)
    w = 2.0 * np.pi * f
    x = 2.0 * np.pi * f / hw.ripple_period_hz

    def level(db: float) -> float:
        return 10.0 ** (db / 20.0)

    directivity = level(hw.directivity_db) * (1 + hw.ripple * np.sin(x)) * np.exp(
        -1j * (w * 0.35e-9 + hw.phase_rad))
    source = level(hw.source_match_db) * (1 + hw.ripple * np.cos(x + 1.0)) * np.exp(
        -1j * (w * 0.9e-9 + hw.phase_rad + 1.0))
    load = level(hw.load_match_db) * (1 + hw.ripple * np.sin(1.4 * x)) * np.exp(
        -1j * (w * 0.7e-9 + hw.phase_rad + 2.0))
    track_db = hw.tracking_db + hw.tracking_slope_db_per_ghz * f / 1e9
    phase = w * hw.internal_delay_s + hw.phase_rad
    # e10 = e01 = the square root of the tracking product, written without a branch cut
    one_way = 10.0 ** (track_db / 40.0) * np.exp(-0.5j * phase)
    return PortTerms(directivity, source, one_way * one_way, one_way, load, one_way.copy())


def cable_s(hw: PortHardware, freq_hz: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """S11 (= S22) and S21 of the port's test cable."""
    gl = coax_gamma_l(freq_hz, hw.cable_delay_s, hw.cable_loss_db_at_1ghz)
    return uniform_line(hw.cable_z_ohm, gl, 50.0)


def isolation(freq_hz: np.ndarray, phase_rad: float) -> np.ndarray:
    """Leakage between the ports (e30, e03'), around −100 dB."""
    f = np.asarray(freq_hz, dtype=np.float64)
    level = 10.0 ** (ISOLATION_DB / 20.0)
    return level * (1 + 0.5 * np.sin(f / 2.1e9)) * np.exp(-1j * (2 * np.pi * f * 3e-9 + phase_rad))


def reference_plane_terms(freq_hz: np.ndarray,
                          fixture: tuple | None = None) -> dict[str, np.ndarray]:
    """The 12 error terms at the reference planes; ``fixture`` = (f11, f21, f22) at port 1."""
    ports = []
    for hw in (PORT1, PORT2):
        c11, c21 = cable_s(hw, freq_hz)
        ports.append(connector_terms(hw, freq_hz).through(c11, c21, c11))
    p1, p2 = ports
    if fixture is not None:
        p1 = p1.through(*fixture)
    terms = {
        "e00": p1.directivity, "e11": p1.source_match, "e10e01": p1.tracking,
        "e10e32": p1.one_way * p2.receive, "e22": p2.load_match, "e30": isolation(freq_hz, 0.2),
        "e33r": p2.directivity, "e22r": p2.source_match, "e23e32r": p2.tracking,
        "e11r": p1.load_match, "e03r": isolation(freq_hz, 1.1),
    }
    gf, gr = switch_terms(terms)
    eight_forward = terms["e10e32"] * (1 - terms["e33r"] * gf)
    eight_reverse = terms["e10e01"] * terms["e23e32r"] / eight_forward
    terms["e23e01r"] = eight_reverse / (1 - terms["e00"] * gr)
    return terms


def switch_terms(terms: dict[str, np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Γf = a2/b2 (port 1 driving) and Γr = a1/b1 (port 2 driving) of the switch, from the
    difference between each port's load match and source match (see the module doc)."""
    d2 = terms["e22"] - terms["e22r"]
    gf = d2 / (terms["e23e32r"] + terms["e33r"] * d2)
    d1 = terms["e11r"] - terms["e11"]
    gr = d1 / (terms["e10e01"] + terms["e00"] * d1)
    return gf, gr


def measure(terms: dict[str, np.ndarray], s: np.ndarray) -> np.ndarray:
    """Raw (n, 2, 2) measured S from the true S (n, 2, 2) at the reference planes."""
    s11, s21, s12, s22 = s[:, 0, 0], s[:, 1, 0], s[:, 0, 1], s[:, 1, 1]
    t = terms
    ds = s11 * s22 - s12 * s21
    d_f = 1.0 - t["e11"] * s11 - t["e22"] * s22 + t["e11"] * t["e22"] * ds
    d_r = 1.0 - t["e11r"] * s11 - t["e22r"] * s22 + t["e11r"] * t["e22r"] * ds
    m = np.empty_like(s)
    m[:, 0, 0] = t["e00"] + t["e10e01"] * (s11 - t["e22"] * ds) / d_f
    m[:, 1, 0] = t["e30"] + t["e10e32"] * s21 / d_f
    m[:, 1, 1] = t["e33r"] + t["e23e32r"] * (s22 - t["e11r"] * ds) / d_r
    m[:, 0, 1] = t["e03r"] + t["e23e01r"] * s12 / d_r
    return m
