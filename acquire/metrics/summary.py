"""Key metrics of a sweep in one JSON-able mapping (for verdicts, logs and plots)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from acquire.jsonclean import finite_or_none
from acquire.metrics import conversions as cv
from acquire.metrics.errors import MetricError
from acquire.metrics.features import Bandwidth, Resonance, bandwidth, q_factor, resonance_min_gamma
from acquire.metrics.markers import Marker, marker
from acquire.sweep import Sweep

# Thresholds the summary always reports. Both are common practice, not standards:
# the "-10 dB bandwidth" (RL >= 10 dB) and SWR <= 2 (RL >= 9.54 dB) of antenna work.
SUMMARY_RETURN_LOSS_DB = 10.0
SUMMARY_SWR = 2.0
# A two-port whose |S21| or |S12| rises above this somewhere passes signal (a thru, a
# cable, a filter): its S11 is not a load's impedance and has no resonator Q. Our choice.
TRANSMITS_ABOVE_DB = -20.0


def transmits(sweep: Sweep) -> bool:
    """True for a two-port (or more) whose port 1 to port 2 path passes signal."""
    if sweep.ports < 2:
        return False
    with np.errstate(all="ignore"):
        db = cv.db20(np.concatenate([sweep.param("S21"), sweep.param("S12")]))
    finite = db[np.isfinite(db)]
    return bool(finite.size) and float(np.max(finite)) > TRANSMITS_ABOVE_DB


@dataclass(frozen=True)
class ReflectionSummary:
    """Resonance, match and bandwidths of one reflection parameter."""

    parameter: str
    resonance: Resonance
    at_resonance: Marker
    bandwidth_rl: Bandwidth
    bandwidth_swr: Bandwidth
    q_unloaded: float | None
    q_loaded: float | None

    def to_dict(self) -> dict[str, Any]:
        z = self.at_resonance.impedance
        return {
            "parameter": self.parameter,
            "resonance_hz": self.resonance.freq_hz,
            "resonance_at_sweep_edge": self.resonance.at_edge,
            "gamma_min": self.resonance.gamma_abs,
            "swr_min": finite_or_none(cv.swr(self.resonance.gamma_abs)),
            "return_loss_max_db": finite_or_none(cv.return_loss_db(self.resonance.gamma_abs)),
            "impedance_at_resonance_ohm": [finite_or_none(z.real), finite_or_none(z.imag)],
            f"bandwidth_rl{SUMMARY_RETURN_LOSS_DB:g}db": _band_dict(self.bandwidth_rl),
            f"bandwidth_swr{SUMMARY_SWR:g}": _band_dict(self.bandwidth_swr),
            "q_unloaded": self.q_unloaded,
            "q_loaded": self.q_loaded,
        }


def reflection_summary(sweep: Sweep, parameter: str = "S11") -> ReflectionSummary:
    """Summarise one reflection parameter; raises ``MetricError`` on non-finite data."""
    port = int(parameter[1]) - 1
    z0 = sweep.z0[port]
    f = sweep.freq_hz
    g = sweep.param(parameter)
    if not np.all(np.isfinite(g)):
        raise MetricError(f"{parameter} holds non-finite values; no metrics")
    res = resonance_min_gamma(f, g)
    at_res = marker(f, g, res.freq_hz, z0)
    bw_rl = bandwidth(f, g, return_loss_min_db=SUMMARY_RETURN_LOSS_DB, around_hz=res.freq_hz)
    bw_swr = bandwidth(f, g, swr_max=SUMMARY_SWR, around_hz=res.freq_hz)
    q0 = ql = None
    if not res.at_edge and f.size >= 3:
        try:
            q = q_factor(f, g, res.freq_hz, z0)
            q0, ql = q.unloaded, q.loaded
        except MetricError:
            pass  # no clean resonance: the summary simply has no Q
    return ReflectionSummary(parameter, res, at_res, bw_rl, bw_swr, q0, ql)


def key_metrics(sweep: Sweep) -> dict[str, Any]:
    """S11 summary, plus |S21| extremes for a two-port; empty parts are left out."""
    out: dict[str, Any] = {}
    try:
        out["S11"] = reflection_summary(sweep, "S11").to_dict()
        if transmits(sweep):  # no resonator behind port 1: a Q would mean nothing
            out["S11"]["q_unloaded"] = out["S11"]["q_loaded"] = None
    except MetricError as exc:
        out["S11"] = {"error": str(exc)}
    if sweep.ports >= 2:
        s21 = sweep.param("S21")
        if np.all(np.isfinite(s21)):
            db = cv.db20(s21)
            lo, hi = int(np.argmin(db)), int(np.argmax(db))
            out["S21"] = {
                "db_min": float(db[lo]), "db_min_hz": float(sweep.freq_hz[lo]),
                "db_max": float(db[hi]), "db_max_hz": float(sweep.freq_hz[hi]),
            }
    return out


def _band_dict(bw: Bandwidth) -> dict[str, Any]:
    band = bw.band
    return {
        "threshold_s_db": bw.threshold_db,
        "width_hz": bw.width_hz,
        "fractional": bw.fractional,
        "lo_hz": band.lo_hz if band else None,
        "hi_hz": band.hi_hz if band else None,
        "edge_limited": bw.edge_limited,
        "bands_found": len(bw.bands),
    }


