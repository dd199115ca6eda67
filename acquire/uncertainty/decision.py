"""Decision rules: simple acceptance, or guarded acceptance with the uncertainty as guard.

ILAC-G8:09/2019 ("Guidelines on Decision Rules and Statements of Conformity") and
ISO 14253-1:2017 describe both:

- ``simple``: a value passes when it lies within its limit (no guard band); near the
  limit the chance of a wrong pass can reach 50 %.
- ``guarded``: a value passes only when it lies inside its limit by at least the guard
  band w, and fails only when it lies outside by at least w; in between it is
  *indeterminate* (neither conformity nor non-conformity is proven; retest or hold).
  Here w = guard × U (U the expanded uncertainty, k = 2; guard 1 is the usual choice).

A plan chooses the rule in its ``decision:`` section::

    decision:
      rule: guarded            # simple (the default) | guarded
      guard: 1                 # w = guard x U (0 to 3)
      uncertainty:             # budget inputs (see acquire.uncertainty.budget), optional
        load_error: -40 dB     # dB or linear
        phase_error: 1 deg
        magnitude_error: 0.005
        repeatability: -54 dB  # RMS |dG| of one reconnection
        noise: auto            # from the calibration's two load readings, or a level
        drift_per_hour: 0.0005
        thru_error: 0          # two-port: the thru's |S21| within +/- this (relative)

With ``guarded``, every point a limit judges carries the interval value ± w; a segment
fails if any point's interval lies wholly outside, else is indeterminate if any point's
interval straddles the limit, else passes. Quantities with no uncertainty model (phase,
group delay, R, X) keep simple acceptance, and the verdict says so.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from acquire.uncertainty.budget import Budget
from acquire.units import parse_quantity
from acquire.yamlfile import Node

RULES = ("simple", "guarded")
PASS, INDETERMINATE, FAIL = 0, 1, 2
STATES = ("pass", "indeterminate", "fail")
BUDGET_KEYS = ("load_error", "phase_error", "magnitude_error", "repeatability", "noise",
               "drift_per_hour", "thru_error")


@dataclass(frozen=True)
class DecisionRule:
    """The plan's decision rule and its uncertainty budget."""

    rule: str = "simple"
    guard: float = 1.0
    budget: Budget = field(default_factory=Budget)
    noise_auto: bool = True

    @property
    def guarded(self) -> bool:
        return self.rule == "guarded"

    def describe(self) -> str:
        if not self.guarded:
            return "simple acceptance (no guard band)"
        return f"guarded acceptance, guard band {self.guard:g} x U (k = 2)"

    def to_dict(self) -> dict[str, Any]:
        return {"rule": self.rule, "guard": self.guard if self.guarded else 0.0,
                "coverage_factor": 2.0, "statement": self.describe()}


SIMPLE = DecisionRule()


def parse_decision(node: Node) -> DecisionRule:
    """Validate a plan's ``decision:`` section (absent: simple acceptance)."""
    if not node.present or node.value is None:
        return SIMPLE
    node.mapping(("rule", "guard", "uncertainty"))
    rule = node["rule"].text("simple", choices=RULES)
    guard = node["guard"].number(1.0, lo=0.0, hi=3.0)
    budget, auto = _budget(node["uncertainty"])
    return DecisionRule(rule, guard, budget, auto)


def _budget(node: Node) -> tuple[Budget, bool]:
    node.mapping(BUDGET_KEYS, optional=True)
    base = Budget()
    changes: dict[str, Any] = {}
    for key, attr in (("load_error", "load_error"), ("repeatability", "repeatability"),
                      ("magnitude_error", "magnitude_error"),
                      ("drift_per_hour", "drift_per_hour"), ("thru_error", "thru_error")):
        if node[key].present:
            changes[attr] = _level(node[key])
    if node["phase_error"].present:
        changes["phase_error_deg"] = node["phase_error"].quantity("angle", lo=0.0, hi=45.0)
    auto = True
    if node["noise"].present and node["noise"].value != "auto":
        changes["noise"] = _level(node["noise"])
        changes["noise_source"] = "plan"
        auto = False
    return replace(base, **changes), auto


def _level(node: Node) -> float:
    """A linear level (0 to 1), or a dB level such as ``-40 dB`` (20·log10)."""
    value = node.value
    if isinstance(value, str) and value.strip().lower().endswith("db"):
        try:
            db = parse_quantity(value, "decibel")
        except ValueError as exc:
            node.fail(str(exc))
        if db > 0:
            node.fail(f"must be a level at or below 0 dB, got {value!r}")
        return float(10 ** (db / 20))
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not 0 <= value <= 1:
        node.fail(f"must be a linear level from 0 to 1 or a dB level such as '-40 dB', "
                  f"got {value!r}")
    return float(value)


def point_states(lo: np.ndarray, hi: np.ndarray, upper: np.ndarray | None,
                 lower: np.ndarray | None) -> np.ndarray:
    """PASS / INDETERMINATE / FAIL per point for value intervals [lo, hi] (guard included).

    Upper limit L: pass when hi <= L, fail when lo > L. Lower limit: pass when lo >= L,
    fail when hi < L. A point takes the worse state of its two limits.
    """
    state = np.full(np.shape(lo), PASS, dtype=np.int8)
    if upper is not None:
        state = np.maximum(state, np.where(lo > upper, FAIL, np.where(hi <= upper, PASS,
                                                                      INDETERMINATE)))
    if lower is not None:
        state = np.maximum(state, np.where(hi < lower, FAIL, np.where(lo >= lower, PASS,
                                                                      INDETERMINATE)))
    return state.astype(np.int8)


def overall(states: np.ndarray) -> str:
    """Fail if any point fails, else indeterminate if any is, else pass."""
    return STATES[int(states.max())] if states.size else "pass"


def runs(freq_hz: np.ndarray, mask: np.ndarray, limit: int = 20) -> list[list[float]]:
    """Frequency runs of consecutive True positions (at most ``limit``)."""
    m = np.asarray(mask).astype(np.int8)
    if not m.any():
        return []
    step = np.diff(np.concatenate([[0], m, [0]]))
    starts, ends = np.flatnonzero(step == 1), np.flatnonzero(step == -1) - 1
    return [[float(freq_hz[a]), float(freq_hz[b])]
            for a, b in zip(starts[:limit], ends[:limit], strict=True)]
