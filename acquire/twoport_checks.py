"""Two-port limits for a plan's ``checks:`` list: insertion loss, return loss at both
ports, and group delay flatness::

    checks:
      - insertion_loss: {band: [10 MHz, 6 GHz], at_most: 3 dB}          # S21 by default
      - return_loss: {band: [10 MHz, 6 GHz], at_least: 15 dB}           # S11 and S22
      - group_delay_flatness: {band: [2.40 GHz, 2.50 GHz], at_most: 0.5 ns, aperture: 5}

Definitions (Pozar, Microwave Engineering, 4th ed.): insertion loss IL = −20·log10|S21|
(positive dB for a passive device, ch. 4 and 8), return loss RL = −20·log10|Sii|
(ch. 2), group delay τ = −dφ/dω (ch. 8); flatness is its peak-to-peak spread over the
band (common practice). Insertion and return loss are judged as one-segment masks, so
points between the sweep points at the band ends are caught as for any mask, and take
the guard band under guarded acceptance like a mask (``acquire.uncertainty.guarded``). The plan
entries are read by ``acquire.check_parse``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from acquire.checks import Check, CheckError, CheckResult, _inside_sweep
from acquire.masks import Limit, Mask, Segment, evaluate_mask
from acquire.sweep import Sweep
from acquire.uncertainty.guarded import guarded_result
from acquire.units import format_frequency

TRANSMISSION = ("S21", "S12")
REFLECTION = ("S11", "S22")


def _band(lo: float, hi: float) -> str:
    return f"{format_frequency(lo)}..{format_frequency(hi)}"


@dataclass(frozen=True)
class InsertionLossCheck(Check):
    """IL = −20·log10|S21| stays at or below ``at_most`` dB over the band."""

    lo_hz: float
    hi_hz: float
    at_most_db: float
    parameter: str = "S21"
    kind = "insertion_loss"

    @property
    def name(self) -> str:
        return f"insertion loss {self.parameter} {_band(self.lo_hz, self.hi_hz)} " \
               f"at most {self.at_most_db:g} dB"

    @property
    def parameters(self) -> frozenset[str]:
        return frozenset({self.parameter})

    def evaluate(self, sweep: Sweep) -> CheckResult:
        _ports(self, sweep)
        seg = Segment(0, "band", self.parameter, "magnitude_db", self.lo_hz, self.hi_hz,
                      None, Limit(-self.at_most_db, -self.at_most_db))
        result = evaluate_mask(Mask(self.name, "", "plan", (seg,)), sweep)
        worst = result.segments[0].worst
        assert worst is not None
        details = {"parameter": self.parameter, "band_hz": [self.lo_hz, self.hi_hz],
                   "at_most_db": self.at_most_db, "worst_db": -worst.value,
                   "worst_hz": worst.freq_hz, "margin_db": worst.margin}
        return CheckResult(self.kind, self.name, result.verdict,
                           f"{self.name} {result.verdict}: {-worst.value:.2f} dB at "
                           f"{format_frequency(worst.freq_hz)}", details, None, result)

    def evaluate_guarded(self, sweep: Sweep, rule: Any, uncertainty: Any) -> CheckResult:
        """Guarded acceptance (``acquire.uncertainty.decision``) of the same positions."""
        return guarded_result(self, self.evaluate(sweep), rule, uncertainty)


@dataclass(frozen=True)
class ReturnLossCheck(Check):
    """RL = −20·log10|Sii| stays at or above ``at_least`` dB at each named port."""

    lo_hz: float
    hi_hz: float
    at_least_db: float
    params: tuple[str, ...] = REFLECTION
    kind = "return_loss"

    @property
    def name(self) -> str:
        return f"return loss {'/'.join(self.params)} {_band(self.lo_hz, self.hi_hz)} " \
               f"at least {self.at_least_db:g} dB"

    @property
    def parameters(self) -> frozenset[str]:
        return frozenset(self.params)

    def evaluate(self, sweep: Sweep) -> CheckResult:
        _ports(self, sweep)
        segs = tuple(Segment(k, p, p, "return_loss", self.lo_hz, self.hi_hz, None,
                             Limit(self.at_least_db, self.at_least_db))
                     for k, p in enumerate(self.params))
        result = evaluate_mask(Mask(self.name, "", "plan", segs), sweep)
        per_port = {s.segment.parameter: {"worst_db": s.worst.value, "worst_hz": s.worst.freq_hz,
                                          "margin_db": s.worst.margin, "verdict": s.verdict}
                    for s in result.segments if s.worst is not None}
        worst = min(per_port.items(), key=lambda kv: kv[1]["margin_db"])
        details = {"band_hz": [self.lo_hz, self.hi_hz], "at_least_db": self.at_least_db,
                   "ports": per_port}
        return CheckResult(self.kind, self.name, result.verdict,
                           f"{self.name} {result.verdict}: {worst[0]} {worst[1]['worst_db']:.2f}"
                           f" dB at {format_frequency(worst[1]['worst_hz'])}", details, None,
                           result)

    def evaluate_guarded(self, sweep: Sweep, rule: Any, uncertainty: Any) -> CheckResult:
        """Guarded acceptance of the same positions, each port on its own."""
        return guarded_result(self, self.evaluate(sweep), rule, uncertainty)


@dataclass(frozen=True)
class GroupDelayFlatnessCheck(Check):
    """The peak-to-peak group delay of ``parameter`` over the band is at most ``at_most_s``."""

    lo_hz: float
    hi_hz: float
    at_most_s: float
    parameter: str = "S21"
    aperture: int = 1
    kind = "group_delay_flatness"

    @property
    def name(self) -> str:
        return f"group delay flatness {self.parameter} {_band(self.lo_hz, self.hi_hz)} " \
               f"at most {self.at_most_s * 1e9:g} ns"

    @property
    def parameters(self) -> frozenset[str]:
        return frozenset({self.parameter})

    def evaluate(self, sweep: Sweep) -> CheckResult:
        from acquire.metrics import conversions as cv

        _ports(self, sweep)
        _inside_sweep(self, sweep, self.lo_hz, self.hi_hz)
        f = sweep.freq_hz
        tau = cv.group_delay_s(f, sweep.param(self.parameter), self.aperture)
        inside = (f >= self.lo_hz) & (f <= self.hi_hz)
        if inside.sum() < 2:
            raise CheckError(f"{self.name}: fewer than 2 sweep points in the band")
        band = tau[inside]
        if not np.all(np.isfinite(band)):
            raise CheckError(f"{self.name}: the group delay is not finite in the band")
        spread = float(band.max() - band.min())
        verdict = "pass" if spread <= self.at_most_s else "fail"
        fb = f[inside]
        details: dict[str, Any] = {
            "parameter": self.parameter, "band_hz": [self.lo_hz, self.hi_hz],
            "aperture": self.aperture, "at_most_s": self.at_most_s, "spread_s": spread,
            "min_s": float(band.min()), "min_hz": float(fb[np.argmin(band)]),
            "max_s": float(band.max()), "max_hz": float(fb[np.argmax(band)]),
            "margin_s": self.at_most_s - spread,
        }
        return CheckResult(self.kind, self.name, verdict,
                           f"{self.name} {verdict}: {spread * 1e9:.3f} ns peak to peak "
                           f"({band.min() * 1e9:.3f} to {band.max() * 1e9:.3f} ns)", details)


def _ports(check: Check, sweep: Sweep) -> None:
    for name in sorted(check.parameters):
        if max(int(name[1]), int(name[2])) > sweep.ports:
            raise CheckError(f"{check.name}: needs {name} but the sweep has {sweep.ports} "
                             "port(s)")
