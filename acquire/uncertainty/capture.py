"""The uncertainty of one capture: built from its cal set, kit and plan; JSON and comments.

``sweep_uncertainty`` needs a full one-port correction of the reflection (``one-port``
or ``one-path-two-port``, formerly ``enhanced-response``): the other methods leave
directivity or source match uncorrected, and an uncorrected sweep has no budget at all;
then the result says why (``unavailable``) and carries no points. Trace noise comes from
the cal set's raw load reading (``budget.noise_from_load``) scaled to the sweep's IF
bandwidth, power and averaging, unless the plan states a level; drift grows with the cal
set's age.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from acquire.sweep import Sweep
from acquire.uncertainty.budget import Budget, noise_from_load, scale_noise
from acquire.uncertainty.decision import SIMPLE, DecisionRule
from acquire.uncertainty.propagate import STANDARDS, ReflectionUncertainty, reflection_uncertainty
from acquire.units import format_frequency

FULL_REFLECTION = ("one-port", "one-path-two-port", "enhanced-response")  # last: older name
FORMAT = "sweepd-uncertainty"
VERSION = 1


@dataclass(frozen=True, eq=False)
class SweepUncertainty:
    """Per-point uncertainty of the corrected parameters of one sweep."""

    freq_hz: np.ndarray
    reflection: dict[str, ReflectionUncertainty] = field(default_factory=dict)
    budget: Budget | None = None
    unavailable: str | None = None

    def for_parameter(self, parameter: str) -> ReflectionUncertainty | None:
        return self.reflection.get(parameter)

    def why_not(self, parameter: str) -> str:
        """Why ``parameter`` has no uncertainty (for error messages)."""
        if self.unavailable:
            return self.unavailable
        return f"no uncertainty model for {parameter} (only the corrected reflection has one)"

    def interval(self, parameter: str, quantity: str, guard: float = 1.0
                 ) -> tuple[np.ndarray, np.ndarray] | None:
        """Value ± guard·U of a quantity on the sweep grid; None when there is no model."""
        unc = self.reflection.get(parameter)
        if unc is None:
            return None
        return replace(unc, expanded=unc.expanded * guard).interval(quantity)

    def to_dict(self, points: bool = True) -> dict[str, Any]:
        """JSON block: budget, per-parameter summary and (``points``) the U arrays."""
        out: dict[str, Any] = {
            "format": FORMAT, "version": VERSION, "coverage_factor": 2.0,
            "available": not self.unavailable, "unavailable": self.unavailable,
            "budget": self.budget.as_dict() if self.budget else None, "parameters": {},
        }
        for name, unc in self.reflection.items():
            block: dict[str, Any] = {"quantity": "gamma_abs", **unc.summary(self.freq_hz)}
            if points:
                block["expanded"] = [float(x) for x in unc.expanded]
                block["near_match"] = [bool(x) for x in unc.near_match]
            out["parameters"][name] = block
        return out

    def comment_lines(self) -> list[str]:
        """ASCII lines for Touchstone comments (without the leading ``!``)."""
        if self.unavailable:
            return [f"sweepd uncertainty: not available ({self.unavailable})"]
        lines = []
        for name, unc in self.reflection.items():
            s = unc.summary(self.freq_hz)
            rl = s["at_best_match_return_loss_db"]
            rl_text = (f"RL {rl[0]:.2f}..{rl[1]:.2f} dB" if rl[1] is not None
                       else f"RL above {rl[0]:.2f} dB")
            lines.append(f"sweepd uncertainty (k=2) |{name}|: max U {s['max_expanded']:.4f} at "
                         f"{format_frequency(s['max_at_hz'])}; at best match "
                         f"{format_frequency(s['at_best_match_hz'])} |{name}| "
                         f"{s['at_best_match_gamma_abs']:.4f} +/- "
                         f"{s['at_best_match_expanded']:.4f}, {rl_text}")
        if self.budget is not None:
            b = self.budget
            lines.append(f"  budget: load {b.load_error:.4f}, open/short phase "
                         f"+/-{b.phase_error_deg:g} deg, repeatability {b.repeatability:.4f}, "
                         f"noise {float(np.max(b.noise)):.2e} ({b.noise_source}), "
                         f"drift {b.drift:.4f}")
        return lines


def unavailable(sweep: Sweep, why: str) -> SweepUncertainty:
    return SweepUncertainty(np.asarray(sweep.freq_hz), unavailable=why)


def sweep_uncertainty(sweep: Sweep, calset: Any | None, kit: Any | None,
                      rule: DecisionRule = SIMPLE) -> SweepUncertainty:
    """The uncertainty of a corrected ``sweep`` from its ``calset`` and cal ``kit``."""
    if calset is None or kit is None:
        return unavailable(sweep, "the sweep is uncorrected")
    if calset.method not in FULL_REFLECTION:
        return unavailable(sweep, f"a {calset.method} calibration leaves directivity or source "
                                  "match uncorrected")
    port = int(calset.port)
    param = f"S{port}{port}"
    terms = calset.model.reflection.get(param)
    names = _standard_names(calset, kit, param)
    if terms is None or names is None:
        return unavailable(sweep, f"the cal set holds no full {param} correction")
    f = np.asarray(sweep.freq_hz)
    models = {k: kit.reflection(names[k], f) for k in STANDARDS}
    budget = _budget(rule, calset, sweep, terms, names["load"], param)
    unc = reflection_uncertainty(sweep.param(param), models, budget, terms.source_match)
    return SweepUncertainty(f, {param: unc}, budget)


def _standard_names(calset: Any, kit: Any, param: str) -> dict[str, str] | None:
    names = {}
    for kind in STANDARDS:
        found = [n for n in kit.names_of_kind(kind) if f"{n}.{param}" in calset.raw]
        if not found:
            return None
        names[kind] = found[0]
    return names


def _budget(rule: DecisionRule, calset: Any, sweep: Sweep, terms: Any, load: str,
            param: str) -> Budget:
    budget = replace(rule.budget, cal_age_s=float(sweep.meta.get("cal_age_s") or 0.0))
    if not rule.noise_auto:
        return budget
    noise = noise_from_load(calset.raw[f"{load}.{param}"], terms.reflection_tracking)
    if noise is None:
        return budget
    st, now = calset.stimulus, sweep.meta.get("stimulus") or {}
    scaled = scale_noise(
        noise, cal_if_hz=st.if_bandwidth_hz, cal_power_dbm=st.power_dbm,
        cal_averaging=st.averaging,
        if_hz=float(now.get("if_bandwidth_hz", st.if_bandwidth_hz)),
        power_dbm=float(now.get("power_dbm", st.power_dbm)),
        averaging=int(now.get("averaging", st.averaging)))
    return budget.with_noise(scaled, "calibration load reading")
