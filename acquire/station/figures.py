"""The key figures shown for every unit and kept with its verdict.

- resonance: the minimum-|S11| frequency from the sweep's key metrics;
- usable bandwidth: what the plan's first bandwidth check measured (its own threshold),
  else the SWR ≤ 2 band around the resonance (common practice for antennas);
- worst SWR in band: the largest SWR of S11 at the sweep points inside the band (the
  ``station.band``, else the span of the plan's S11 mask segments, else a worst-SWR
  check's band, else the whole sweep); SWR = (1 + |Γ|)/(1 − |Γ|), Pozar, Microwave
  Engineering, 4th ed., ch. 2;
- worst margin: the smallest mask margin (negative when failing), where it lies.

They are added to the verdict's ``metrics`` as ``key_figures`` so the JSON summary, the
journal and ``sweepd summary`` all see them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from acquire.checks import MaskCheck, Verdict, WorstSwrCheck
from acquire.jsonclean import finite_or_none
from acquire.plan import Plan
from acquire.sweep import Sweep
from acquire.units import format_frequency

KEY = "key_figures"


@dataclass(frozen=True)
class KeyFigures:
    band_hz: tuple[float, float]
    resonance_hz: float | None = None
    usable_bandwidth_hz: float | None = None
    usable_rule: str = ""
    worst_swr: float | None = None
    worst_swr_hz: float | None = None
    worst_margin: float | None = None
    worst_where: str = ""

    def to_dict(self) -> dict[str, Any]:
        return {
            "resonance_hz": self.resonance_hz,
            "usable_bandwidth_hz": self.usable_bandwidth_hz,
            "usable_bandwidth_rule": self.usable_rule,
            "worst_swr_in_band": self.worst_swr,
            "worst_swr_hz": self.worst_swr_hz,
            "band_hz": list(self.band_hz),
            "worst_margin": self.worst_margin,
            "worst_margin_at": self.worst_where,
        }

    def line(self) -> str:
        """``resonance 2.45 GHz | usable bandwidth 130 MHz (SWR <= 2) | worst SWR ...``."""
        parts = [f"resonance {_freq(self.resonance_hz)}",
                 f"usable bandwidth {_freq(self.usable_bandwidth_hz)}"
                 + (f" ({self.usable_rule})" if self.usable_rule else "")]
        lo, hi = self.band_hz
        swr = "n/a" if self.worst_swr is None else f"{self.worst_swr:.3f}"
        parts.append(f"worst SWR in {format_frequency(lo)}..{format_frequency(hi)} {swr}"
                     + (f" at {format_frequency(self.worst_swr_hz)}"
                        if self.worst_swr_hz is not None else ""))
        return " | ".join(parts)


def figures_band(plan: Plan, configured: tuple[float, float] | None) -> tuple[float, float]:
    """The band of 'worst SWR in band' (see the module docstring)."""
    if configured is not None:
        return configured
    spans = [(s.from_hz, s.to_hz) for c in plan.checks if isinstance(c, MaskCheck)
             for s in c.mask.segments if s.parameter == "S11"]
    if spans:
        return min(a for a, _ in spans), max(b for _, b in spans)
    for check in plan.checks:
        if isinstance(check, WorstSwrCheck) and check.parameter == "S11":
            return check.lo_hz, check.hi_hz
    return plan.stimulus.start_hz, plan.stimulus.stop_hz


def worst_swr_in_band(sweep: Sweep, band_hz: tuple[float, float]
                      ) -> tuple[float | None, float | None]:
    """Largest SWR of S11 at the sweep points inside the band, and its frequency."""
    from acquire.metrics import swr

    f = sweep.freq_hz
    lo, hi = band_hz
    slack = 1e-9 * max(float(f[-1]), 1.0) if f.size else 0.0
    inside = (f >= lo - slack) & (f <= hi + slack)
    if not inside.any():
        return None, None
    gamma = sweep.param("S11")[inside]
    if not np.all(np.isfinite(gamma)):
        return None, None
    values = swr(gamma)
    k = int(np.argmax(values))
    value = float(values[k])
    return finite_or_none(value), float(f[inside][k])


def key_figures(sweep: Sweep, verdict: Verdict, plan: Plan,
                band_hz: tuple[float, float] | None = None) -> KeyFigures:
    band = figures_band(plan, band_hz)
    s11 = verdict.metrics.get("S11", {})
    resonance = s11.get("resonance_hz") if "error" not in s11 else None
    usable, rule = _usable(verdict, s11)
    worst, worst_hz = worst_swr_in_band(sweep, band)
    margin, where = worst_margin(verdict)
    return KeyFigures(band, resonance, usable, rule, worst, worst_hz, margin, where)


def with_figures(verdict: Verdict, figures: KeyFigures) -> Verdict:
    """The verdict with ``metrics['key_figures']`` added (a new, frozen object)."""
    from dataclasses import replace

    clean = {k: (None if isinstance(v, float) and not np.isfinite(v) else v)
             for k, v in figures.to_dict().items()}
    return replace(verdict, metrics={**verdict.metrics, KEY: clean})


def worst_margin(verdict: Verdict) -> tuple[float | None, str]:
    """The smallest mask-segment margin and a description of where it lies."""
    best: tuple[float, str] | None = None
    for result in verdict.to_dict()["checks"]:
        for seg in result.get("segments") or ():
            worst = seg.get("worst") or {}
            if worst.get("margin") is None:
                continue
            margin = float(worst["margin"])
            if best is None or margin < best[0]:
                where = (f"{result['name']} '{seg['name']}': {seg['quantity']} "
                         f"{worst['value']:.4g} at {format_frequency(worst['freq_hz'])}, "
                         f"{worst['bound']} limit {worst['limit']:.4g}")
                best = (margin, where)
    return best if best is not None else (None, "")


def _usable(verdict: Verdict, s11: dict[str, Any]) -> tuple[float | None, str]:
    for result in verdict.results:
        if result.kind == "bandwidth" and result.verdict != "error":
            threshold = result.details.get("threshold", {})
            rule = (f"SWR <= {threshold['swr']:g}" if "swr" in threshold
                    else f"RL >= {threshold.get('return_loss_db', 0):g} dB")
            return result.details.get("measured_hz"), rule
    band = s11.get("bandwidth_swr2") or {}
    if band.get("lo_hz") is None:
        return None, "SWR <= 2"
    return band.get("width_hz"), "SWR <= 2"


def _freq(hz: float | None) -> str:
    return "n/a" if hz is None else format_frequency(hz)


_QUANTITY_WORDS = {"swr": "SWR", "return_loss": "return loss", "magnitude_db": "level",
                   "phase": "phase", "group_delay": "group delay", "resistance": "R",
                   "reactance": "X"}


def worst_violation(verdict: Verdict) -> str | None:
    """The worst failing mask segment in words (what, where, the limit, the failing
    range), else the first failing check's own summary; None when nothing fails."""
    from acquire.metrics.quantities import format_value

    worst: tuple[float, str] | None = None
    for result in verdict.to_dict()["checks"]:
        for seg in result.get("segments") or ():
            w = seg.get("worst") or {}
            if seg.get("verdict") != "fail" or w.get("margin") is None:
                continue
            q = seg["quantity"]
            side = "above the upper" if w["bound"] == "upper" else "below the lower"
            ranges = seg.get("failing_ranges_hz") or []
            spread = ""
            if ranges:
                spread = (f"; it fails from {format_frequency(ranges[0][0])} to "
                          f"{format_frequency(ranges[-1][1])}")
            text = (f"{seg['parameter']} {_QUANTITY_WORDS.get(q, q)} is "
                    f"{format_value(q, w['value'])} at {format_frequency(w['freq_hz'])}, "
                    f"{side} limit {format_value(q, w['limit'])} of {result['name']} "
                    f"'{seg['name']}'{spread}")
            if worst is None or float(w["margin"]) < worst[0]:
                worst = (float(w["margin"]), text)
    if worst is not None:
        return worst[1]
    failing = [r for r in verdict.results if r.verdict not in ("pass", "skipped")]
    return failing[0].summary if failing else None
