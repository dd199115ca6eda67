"""The uncertainty of one capture: built from its cal set, kit and plan; JSON and comments.

``sweep_uncertainty`` needs a full correction of the reflection: ``one-port`` or
``one-path-two-port`` (once called ``enhanced-response``) give the corrected port's
|Sii| (and |S21| after the one-path method, with the load match it leaves in), the full
two-port methods (``two-port``, ``two-port-unknown-thru``) give all four parameters of a
two-port sweep (``fulltwoport``: the whole calibration solved again from its readings;
a one-port sweep corrected by such a cal set gets the one-port model of port 1). The
normalisations leave directivity or source match uncorrected, an uncorrected sweep has
no budget at all, and a full two-port cal set without the readings its model needs
(thru, switch terms) cannot be modelled; then the result says why (``unavailable``,
one line) and carries no points. Trace noise comes from the cal set's two readings of
the load (``budget.noise_from_repeat``), or from its one reading in older cal sets
(``budget.noise_from_load``); after a full two-port calibration the larger of the two
ports' figures) scaled to the sweep's IF bandwidth, power and averaging, unless the
plan states a level; drift grows with the cal set's age.
"""

from __future__ import annotations

import functools
import json
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from acquire.calibration import load_kit
from acquire.calibration.calset import AGAIN
from acquire.errors import CalError
from acquire.sweep import Sweep
from acquire.uncertainty.budget import Budget, noise_from_load, noise_from_repeat, scale_noise
from acquire.uncertainty.decision import SIMPLE, DecisionRule
from acquire.uncertainty.fullcalset import setup_from_calset
from acquire.uncertainty.fulltwoport import full_two_port_uncertainty
from acquire.uncertainty.propagate import STANDARDS, ReflectionUncertainty, reflection_uncertainty
from acquire.uncertainty.transmission import (
    TwoPortSetup,
    transmission_uncertainty,
    with_load_match,
)
from acquire.units import format_frequency

ONE_PATH = ("one-path-two-port", "enhanced-response")  # the second is the older name
FULL_REFLECTION = ("one-port", *ONE_PATH)
FULL_TWO_PORT = ("two-port", "two-port-unknown-thru")
_PARAMS = ("S11", "S22", "S33", "S44")
_THROUGH = ("S21", "S12")
FORMAT = "sweepd-uncertainty"
VERSION = 1


@dataclass(frozen=True, eq=False)
class SweepUncertainty:
    """Per-point uncertainty of the corrected parameters of one sweep."""

    freq_hz: np.ndarray
    reflection: dict[str, ReflectionUncertainty] = field(default_factory=dict)
    budget: Budget | None = None
    unavailable: str | None = None
    transmission: dict[str, Any] = field(default_factory=dict)  # TransmissionUncertainty

    def for_parameter(self, parameter: str) -> ReflectionUncertainty | None:
        return self.reflection.get(parameter)

    def why_not(self, parameter: str) -> str:
        """Why ``parameter`` has no uncertainty (for error messages)."""
        if self.unavailable:
            return self.unavailable
        return (f"no uncertainty model for {parameter} (the corrected reflection has one, "
                "S21 after a one-path-two-port calibration, all four parameters after a "
                "full two-port one)")

    def interval(self, parameter: str, quantity: str, guard: float = 1.0
                 ) -> tuple[np.ndarray, np.ndarray] | None:
        """Value ± guard·U of a quantity on the sweep grid; None when there is no model."""
        unc = self.reflection.get(parameter)
        if unc is not None:
            return replace(unc, expanded=unc.expanded * guard).interval(quantity)
        trans = self.transmission.get(parameter)
        if trans is None or quantity != "magnitude_db":
            return None
        lo = np.maximum(trans.s21_abs - guard * trans.expanded, 0.0)
        with np.errstate(divide="ignore"):
            return 20 * np.log10(lo), 20 * np.log10(trans.s21_abs + guard * trans.expanded)

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
        for name, trans in self.transmission.items():
            k = int(np.argmax(trans.expanded))
            block = {"quantity": f"{name.lower()}_abs", "max_expanded": float(trans.expanded[k]),
                     "max_at_hz": float(self.freq_hz[k])}
            near = getattr(trans, "near_match", None)
            if trans.bias is not None:
                block["max_load_match_bias"] = float(trans.bias.max())
            if near is not None:
                block["points_near_zero"] = int(near.sum())
            if points:
                block["expanded"] = [float(x) for x in trans.expanded]
                if near is not None:
                    block["near_match"] = [bool(x) for x in near]
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
        for name, trans in self.transmission.items():
            k = int(np.argmax(trans.expanded))
            where = (f"max U {trans.expanded[k]:.4f} at {format_frequency(float(self.freq_hz[k]))}"
                     f" (|{name}| {trans.s21_abs[k]:.4f}")
            if trans.bias is None:
                lines.append(f"sweepd uncertainty (k=2) |{name}|: {where}; load match corrected)")
            else:
                lines.append(f"sweepd uncertainty (95 %) |{name}|: {where}; load-match bias up "
                             f"to {float(trans.bias.max()):.4f})")
        if self.budget is not None:
            b = self.budget
            thru = f", thru |S21| +/-{b.thru_error:g}" if b.thru_error else ""
            lines.append(f"  budget: load {b.load_error:.4f}, open/short phase "
                         f"+/-{b.phase_error_deg:g} deg, repeatability {b.repeatability:.4f}, "
                         f"noise {float(np.max(b.noise)):.2e} ({b.noise_source}), "
                         f"drift {b.drift:.4f}{thru}")
        return lines


def cached_kit(path: Path | str) -> Any:
    """The cal kit at ``path``, parsed once per file version (soaks and stations capture
    many sweeps with one kit)."""
    p = Path(path)
    try:
        st = p.stat()
        version = (st.st_mtime_ns, st.st_size)
    except OSError:
        version = (0, 0)  # load_kit then names the problem
    return _kit(str(p), version)


@functools.lru_cache(maxsize=8)
def _kit(path: str, version: tuple[int, int]) -> Any:

    return load_kit(path)


def unavailable(sweep: Sweep, why: str) -> SweepUncertainty:
    return SweepUncertainty(np.asarray(sweep.freq_hz), unavailable=why)


def from_summary(sweep: Sweep, touchstone: Path) -> SweepUncertainty:
    """The U stored in the capture JSON beside ``touchstone`` (``sweepd check``)."""
    path = touchstone.with_suffix(".json")
    try:
        block = json.loads(path.read_text())["uncertainty"]
    except FileNotFoundError:
        return unavailable(sweep, f"no capture JSON {path.name} beside the file")
    except (OSError, ValueError, KeyError, TypeError):
        return unavailable(sweep, f"{path}: no readable uncertainty block")
    if not isinstance(block, dict) or not block.get("available"):
        why = block.get("unavailable") if isinstance(block, dict) else None
        return unavailable(sweep, f"{path.name}: {why or 'no uncertainty'}")
    out: dict[str, ReflectionUncertainty] = {}
    trans: dict[str, Any] = {}
    through = _THROUGH if sweep.ports > 1 else ()
    for name, entry in (block.get("parameters") or {}).items():
        if name not in (*_PARAMS[:sweep.ports], *through) or not isinstance(entry, dict):
            continue
        expanded = _stored_expanded(entry.get("expanded"), sweep.points)
        if expanded is None:
            continue
        g = np.abs(sweep.param(name))
        near = np.asarray(entry.get("near_match") or [], bool)
        near = near if near.shape == g.shape else np.zeros(g.shape, bool)
        cov = np.zeros((g.size, 2, 2))
        if name in through:
            from acquire.uncertainty.fulltwoport import CorrectedTransmission

            trans[name] = CorrectedTransmission(g, expanded / 2, expanded, near, cov)
        else:
            out[name] = ReflectionUncertainty(g, expanded / 2, expanded, near, cov)
    if not out and not trans:
        return unavailable(sweep, f"{path.name}: its uncertainty does not fit this sweep")
    return SweepUncertainty(np.asarray(sweep.freq_hz), out, transmission=trans)


def _stored_expanded(u: Any, points: int) -> np.ndarray | None:
    """A stored U array, if it is one finite non-negative number per point."""
    if not isinstance(u, list) or len(u) != points:
        return None
    try:
        expanded = np.asarray(u, np.float64)
    except (TypeError, ValueError):
        return None
    return expanded if np.all(np.isfinite(expanded) & (expanded >= 0)) else None


def sweep_uncertainty(sweep: Sweep, calset: Any | None, kit: Any | None,
                      rule: DecisionRule = SIMPLE) -> SweepUncertainty:
    """The uncertainty of a corrected ``sweep`` from its ``calset`` and cal ``kit``."""
    if calset is None or kit is None:
        return unavailable(sweep, "the sweep is uncorrected")
    if calset.method in FULL_TWO_PORT:
        if sweep.ports > 1:
            return _full_two_port(sweep, calset, kit, rule)
    elif calset.method not in FULL_REFLECTION:
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
    trans = {}
    if sweep.ports > 1:
        two = calset.model.transmission.get("S21")
        if calset.method not in ONE_PATH or port != 1 or two is None:
            return unavailable(sweep, f"a {calset.method} calibration of a two-port "
                                      "measurement leaves port 2's load match unknown")

        unc = with_load_match(unc, sweep, two.load_match)
        s21 = _transmission(sweep, calset, kit, models, budget)
        if s21 is not None:
            trans["S21"] = s21
    return SweepUncertainty(f, {param: unc}, budget, transmission=trans)


def _full_two_port(sweep: Sweep, calset: Any, kit: Any, rule: DecisionRule) -> SweepUncertainty:
    """All four parameters of a two-port sweep after a full two-port calibration."""

    if sweep.ports != 2:
        return unavailable(sweep, f"a {calset.method} calibration models two ports; the sweep "
                                  f"has {sweep.ports}")
    try:
        setup = setup_from_calset(sweep, calset, kit)
        if isinstance(setup, str):
            return unavailable(sweep, setup)
        budget = max((_budget(rule, calset, sweep, calset.model.reflection[p],
                              setup.names["load"], p) for p in ("S11", "S22")),
                     key=lambda b: float(np.max(b.noise)))
        reflection, transmission = full_two_port_uncertainty(setup, budget)
    except (CalError, ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
        first = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        return unavailable(sweep, f"the {calset.method} calibration cannot be modelled: {first}")
    for name, unc in (*reflection.items(), *transmission.items()):
        bad = ~np.isfinite(unc.expanded)
        if bad.any():
            at = format_frequency(float(sweep.freq_hz[int(np.argmax(bad))]))
            return unavailable(sweep, f"the uncertainty of {name} is not finite at {at}")
    return SweepUncertainty(np.asarray(sweep.freq_hz), reflection, budget,
                            transmission=transmission)


def _transmission(sweep: Sweep, calset: Any, kit: Any, models: dict[str, np.ndarray],
                  budget: Budget) -> Any:

    terms = calset.model.transmission.get("S21")
    thru = [n for n in kit.names_of_kind("thru") if f"{n}.S21" in calset.raw]
    if terms is None or not thru:
        return None
    f = np.asarray(sweep.freq_hz)
    setup = TwoPortSetup(
        calset.model.reflection["S11"], terms.transmission_tracking, terms.load_match, models,
        kit.thru_s(thru[0], f),
        (sweep.param("S11"), sweep.param("S21"), sweep.param("S21"), np.zeros(f.size)),
        np.abs(sweep.param("S22")))  # reciprocal device; S22 uncorrected: raw |S22| bound
    return transmission_uncertainty(setup, budget, budget.thru_error)


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
    again = calset.raw.get(f"{load}.{param}{AGAIN}")
    if again is not None:
        noise = noise_from_repeat(calset.raw[f"{load}.{param}"], again,
                                  terms.reflection_tracking)
        source = "calibration load read twice"
    else:
        noise = noise_from_load(calset.raw[f"{load}.{param}"], terms.reflection_tracking)
        source = "calibration load reading"
    if noise is None:
        return budget
    st, now = calset.stimulus, sweep.meta.get("stimulus") or {}
    scaled = scale_noise(
        noise, cal_if_hz=st.if_bandwidth_hz, cal_power_dbm=st.power_dbm,
        cal_averaging=st.averaging,
        if_hz=float(now.get("if_bandwidth_hz", st.if_bandwidth_hz)),
        power_dbm=float(now.get("power_dbm", st.power_dbm)),
        averaging=int(now.get("averaging", st.averaging)))
    return budget.with_noise(scaled, source)
