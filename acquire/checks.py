"""Plan-level checks and the verdict they add up to.

A plan's ``checks:`` list holds masks and derived checks::

    checks:
      - mask: patch-2g45                       # bare name or path relative to the plan
      - bandwidth: {below_swr: 2.0, at_least: 60 MHz}     # or below_return_loss: 10 dB
      - resonance: {within: [2.43 GHz, 2.47 GHz]}
      - worst_swr: {band: [2.40 GHz, 2.50 GHz], at_most: 1.8}

``acquire.check_parse.parse_checks`` validates that list (errors name file and key path);
``evaluate_checks`` judges a sweep and returns a ``Verdict`` (``acquire.verdict``, which
also says how results add up and the exit codes). A check that cannot judge the sweep
(non-finite data, a mask outside the sweep, a missing S-parameter) gives an ``error``
result instead of raising, so a verdict always exists and nothing already captured is
lost. The JSON form is documented in configs/masks/README.md ("Verdict JSON").
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from dataclasses import dataclass
from typing import Any

from acquire.errors import CheckError
from acquire.jsonclean import json_safe
from acquire.masks import EDGE_RTOL, Limit, Mask, Segment, evaluate_mask
from acquire.metrics import bandwidth, key_metrics, resonance_min_gamma, resonance_reactance
from acquire.sweep import Sweep
from acquire.uncertainty.guarded import guarded_result
from acquire.units import format_frequency
from acquire.verdict import CheckResult, Verdict
from drivers.errors import SweepdError


class Check(ABC):
    """A judgement of one sweep."""

    kind: str

    @property
    @abstractmethod
    def name(self) -> str:
        """Short ASCII name, e.g. ``mask patch-2g45``."""

    @property
    @abstractmethod
    def parameters(self) -> frozenset[str]:
        """S-parameters the sweep must hold."""

    @abstractmethod
    def evaluate(self, sweep: Sweep) -> CheckResult:
        """Judge the sweep; may raise ``SweepdError`` when it cannot."""


# -- the four kinds ------------------------------------------------------------------


@dataclass(frozen=True)
class MaskCheck(Check):
    mask: Mask
    kind = "mask"

    @property
    def name(self) -> str:
        return f"mask {self.mask.name}"

    @property
    def parameters(self) -> frozenset[str]:
        return self.mask.parameters

    def evaluate(self, sweep: Sweep) -> CheckResult:
        result = evaluate_mask(self.mask, sweep)
        worst = result.worst()
        if worst is None:
            raise _check_error(self, "no segment overlaps the sweep; nothing was judged")
        return CheckResult(
            self.kind, self.name, result.verdict,
            f"{self.name} {result.verdict}: {worst.summary()}", result.to_dict(), None, result,
        )

    def evaluate_guarded(self, sweep: Sweep, rule: Any, uncertainty: Any) -> CheckResult:
        """Guarded acceptance (``acquire.uncertainty.decision``) of the same positions."""
        return guarded_result(self, self.evaluate(sweep), rule, uncertainty)


@dataclass(frozen=True)
class BandwidthCheck(Check):
    """Bandwidth around the resonance, below an SWR or return-loss threshold."""

    at_least_hz: float
    swr_max: float | None = None
    return_loss_min_db: float | None = None
    parameter: str = "S11"
    kind = "bandwidth"

    @property
    def name(self) -> str:
        if self.swr_max is not None:
            return f"bandwidth below SWR {self.swr_max:g}"
        return f"bandwidth above {self.return_loss_min_db:g} dB return loss"

    @property
    def parameters(self) -> frozenset[str]:
        return frozenset({self.parameter})

    def evaluate(self, sweep: Sweep) -> CheckResult:
        f, g = sweep.freq_hz, _param(self, sweep)
        bw = bandwidth(f, g, swr_max=self.swr_max, return_loss_min_db=self.return_loss_min_db)
        band = bw.band
        margin = bw.width_hz - self.at_least_hz
        details = {
            "parameter": self.parameter,
            "threshold": ({"swr": self.swr_max} if self.swr_max is not None
                          else {"return_loss_db": self.return_loss_min_db}),
            "threshold_s_db": bw.threshold_db,
            "required_hz": self.at_least_hz,
            "measured_hz": bw.width_hz,
            "lo_hz": band.lo_hz if band else None,
            "hi_hz": band.hi_hz if band else None,
            "center_hz": bw.center_hz,
            "fractional": bw.fractional,
            "edge_limited": bw.edge_limited,
            "bands_found": len(bw.bands),
            "margin_hz": margin,
        }
        if band is None:
            return CheckResult(
                self.kind, self.name, "fail",
                f"{self.name} fail: never below the threshold at the resonance "
                f"{format_frequency(bw.center_hz)}", details,
            )
        if bw.edge_limited and margin < 0:
            raise _check_error(
                self, f"the band reaches the sweep edge after {format_frequency(bw.width_hz)}; "
                f"widen the sweep to measure {format_frequency(self.at_least_hz)}",
            )
        verdict = _judged(self, margin)
        more = " (at least; band reaches the sweep edge)" if bw.edge_limited else ""
        return self._result(verdict, bw, band, more, details)

    def evaluate_guarded(self, sweep: Sweep, rule: Any, uncertainty: Any) -> CheckResult:
        """Guarded acceptance on the band where |S| ± w is surely / possibly below."""
        from acquire.uncertainty.guarded import guarded_bandwidth

        return guarded_bandwidth(self, self.evaluate(sweep), sweep, rule, uncertainty)

    def _result(self, verdict: str, bw: Any, band: Any, more: str, details: dict[str, Any]
                ) -> CheckResult:
        return CheckResult(
            self.kind, self.name, verdict,
            f"{self.name} {verdict}: {format_frequency(bw.width_hz)}{more} "
            f"{format_frequency(band.lo_hz)}..{format_frequency(band.hi_hz)}, "
            f"required {format_frequency(self.at_least_hz)}",
            details,
        )


@dataclass(frozen=True)
class ResonanceCheck(Check):
    """The resonance (minimum |Γ|, or reactance zero) lies within [lo, hi]."""

    lo_hz: float
    hi_hz: float
    method: str = "min_gamma"  # or "reactance_zero"
    parameter: str = "S11"
    kind = "resonance"

    @property
    def name(self) -> str:
        return f"resonance in {format_frequency(self.lo_hz)}..{format_frequency(self.hi_hz)}"

    @property
    def parameters(self) -> frozenset[str]:
        return frozenset({self.parameter})

    def evaluate(self, sweep: Sweep) -> CheckResult:
        f, g = sweep.freq_hz, _param(self, sweep)
        _inside_sweep(self, sweep, self.lo_hz, self.hi_hz)
        z0 = sweep.z0[int(self.parameter[1]) - 1]
        res = resonance_min_gamma(f, g)
        if self.method == "reactance_zero":
            res = resonance_reactance(f, g, z0, near_hz=res.freq_hz)
        details: dict[str, Any] = {
            "parameter": self.parameter, "method": self.method,
            "within_hz": [self.lo_hz, self.hi_hz],
            "resonance_hz": res.freq_hz if res else None,
            "gamma_abs": res.gamma_abs if res else None,
            "at_sweep_edge": res.at_edge if res else None,
            "margin_hz": None,
        }
        if res is None:
            return CheckResult(self.kind, self.name, "fail",
                               f"{self.name} fail: the reactance never crosses zero", details)
        margin = min(res.freq_hz - self.lo_hz, self.hi_hz - res.freq_hz)
        details["margin_hz"] = margin
        verdict = _judged(self, margin, inside=not res.at_edge)
        where = " (minimum at the sweep edge: no resonance inside)" if res.at_edge else ""
        return CheckResult(
            self.kind, self.name, verdict,
            f"{self.name} {verdict}: {format_frequency(res.freq_hz)}{where}", details,
        )


@dataclass(frozen=True)
class WorstSwrCheck(Check):
    """The largest SWR in a band stays at or below a limit (a one-segment mask)."""

    lo_hz: float
    hi_hz: float
    at_most: float
    parameter: str = "S11"
    kind = "worst_swr"

    @property
    def name(self) -> str:
        return (f"worst SWR {format_frequency(self.lo_hz)}..{format_frequency(self.hi_hz)} "
                f"at most {self.at_most:g}")

    @property
    def parameters(self) -> frozenset[str]:
        return frozenset({self.parameter})

    def evaluate(self, sweep: Sweep) -> CheckResult:
        seg = Segment(0, "band", self.parameter, "swr", self.lo_hz, self.hi_hz,
                      Limit(self.at_most, self.at_most), None)
        mask = Mask(self.name, "", "plan", (seg,))
        result = evaluate_mask(mask, sweep)
        seg_result = result.segments[0]
        worst = seg_result.worst
        assert worst is not None
        details = {
            "parameter": self.parameter,
            "band_hz": [self.lo_hz, self.hi_hz],
            "at_most": self.at_most,
            "worst_swr": worst.value,
            "worst_hz": worst.freq_hz,
            "margin": worst.margin,
            "positions_judged": int(seg_result.freq_hz.size),
        }
        return CheckResult(
            self.kind, self.name, result.verdict,
            f"{self.name} {result.verdict}: SWR {worst.value:.3f} at "
            f"{format_frequency(worst.freq_hz)}", details, None, result,
        )

    def evaluate_guarded(self, sweep: Sweep, rule: Any, uncertainty: Any) -> CheckResult:
        """Guarded acceptance of the band's positions (``acquire.uncertainty.decision``)."""
        return guarded_result(self, self.evaluate(sweep), rule, uncertainty)


def _param(check: Check, sweep: Sweep):
    name = next(iter(check.parameters))
    i, j = int(name[1]), int(name[2])
    if max(i, j) > sweep.ports:
        raise _check_error(check, f"needs {name} but the sweep has {sweep.ports} port(s)")
    return sweep.param(name)


def _inside_sweep(check: Check, sweep: Sweep, lo: float, hi: float) -> None:
    f = sweep.freq_hz
    tol = EDGE_RTOL * max(abs(float(f[-1])), 1.0)
    if lo < f[0] - tol or hi > f[-1] + tol:
        raise _check_error(
            check, f"{format_frequency(lo)}..{format_frequency(hi)} is not inside the sweep "
            f"{format_frequency(f[0])}..{format_frequency(f[-1])}",
        )


def _judged(check: Check, margin: float, *, inside: bool = True) -> str:
    """"pass" or "fail" from a margin; a non-finite margin is an error, never a verdict."""
    if not math.isfinite(margin):
        raise _check_error(check, f"margin is {margin}; a verdict needs finite numbers")
    return "pass" if margin >= 0 and inside else "fail"


def _unfinished_margin(details: Any) -> bool:
    """True if any ``margin*`` value in ``details`` (at any depth) is not a finite number."""
    if isinstance(details, dict):
        for key, value in details.items():
            if str(key).startswith("margin") and isinstance(value, float) \
                    and not math.isfinite(value):
                return True
            if _unfinished_margin(value):
                return True
    elif isinstance(details, list):
        return any(_unfinished_margin(item) for item in details)
    return False


def _check_error(check: Check, message: str) -> CheckError:
    return CheckError(f"{check.name}: {message}")


def _judge(check: Check, sweep: Sweep, decision: Any, uncertainty: Any) -> CheckResult:
    guarded = decision is not None and decision.guarded
    if guarded and hasattr(check, "evaluate_guarded"):
        return check.evaluate_guarded(sweep, decision, uncertainty)
    result = check.evaluate(sweep)
    if guarded:
        note = {"rule": "simple", "statement": f"{check.kind} checks have no guard band: "
                "simple acceptance"}
        result = CheckResult(result.kind, result.name, result.verdict, result.summary,
                             {**result.details, "decision": note}, result.message,
                             result.mask_result)
    return result


def evaluate_checks(
    checks: list[Check], sweep: Sweep, *, metrics: bool = True, source: str | None = None,
    decision: Any = None, uncertainty: Any = None,
) -> Verdict:
    """Judge ``sweep`` with every check; errors become ``error`` results.

    ``decision`` (``acquire.uncertainty.DecisionRule``) chooses simple or guarded
    acceptance; guarded acceptance uses ``uncertainty`` (a ``SweepUncertainty``).
    """
    results = []
    for check in checks:
        try:
            result = _judge(check, sweep, decision, uncertainty)
            if result.verdict != "error" and _unfinished_margin(result.details):
                raise _check_error(check, "a margin is not a finite number; no verdict")
            results.append(result)
        except SweepdError as exc:
            text = str(exc)
            rest = text.removeprefix(f"{check.name}: ")
            results.append(CheckResult(check.kind, check.name, "error",
                                       f"{check.name} error: {rest}", {}, text))
    info: dict[str, Any] = {
        "points": sweep.points,
        "ports": sweep.ports,
        "start_hz": float(sweep.freq_hz[0]) if sweep.points else None,
        "stop_hz": float(sweep.freq_hz[-1]) if sweep.points else None,
        "z0_ohm": list(sweep.z0),
    }
    if source is not None:
        info["source"] = source
    for key in ("serial", "plan"):
        if isinstance(sweep.meta.get(key), str):
            info[key] = sweep.meta[key]
    key = {}
    if metrics and sweep.points:
        key = key_metrics(sweep)
    rule = decision.to_dict() if decision is not None else {}
    return Verdict(tuple(results), info, json_safe(key), rule)
