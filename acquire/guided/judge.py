"""Plausibility checks during a guided calibration, in plain words.

After every measurement the readings held so far are checked together
(``acquire.calibration.check_raw``: sanity, same standard twice, balance, opposition and
load residual once open, short and load are in, and the comparison with the last cal of
the same plan and instrument). After solving, the terms are checked
(``check_terms``). A thru step adds two checks of its own (common practice, no standard
defines them):

- its raw |S21| must stand clear of leakage: a median below ``THRU_MIN_DB`` means
  nothing joins the ports;
- with port 1 already calibrated, the corrected S11 of the thru is the far port's match:
  above ``THRU_MAX_S11`` (|Γ|) on more than the allowed share of points, port 1 sees an
  open end or a loose connector.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from acquire.calibration import CalKit, CheckLimits, Finding, check_raw, check_terms
from acquire.calibration.checks import FAIL
from acquire.calibration.model import OnePortTerms, solve_one_port
from acquire.errors import CalError
from acquire.guided.steps import REFLECTION, TRANSMISSION, Step
from acquire.units import format_frequency

THRU_MIN_DB = -30.0  # common practice: a joined thru reads far above this raw level
THRU_MAX_S11 = 0.5  # common practice: same limit as the load residual
_REFLECT_KINDS = ("open", "short", "load")

Readings = Mapping[str, Mapping[str, np.ndarray]]  # step -> param -> (F,) raw values


@dataclass(frozen=True)
class Judgement:
    """What the checks said: failures (with steps to repeat), notes, figures."""

    failures: tuple[Finding, ...] = ()
    notes: tuple[str, ...] = ()
    figures: Mapping[str, Any] = field(default_factory=dict)
    previous_only: bool = False  # the failures vanish without the last cal
    likely: tuple[str, ...] = ()  # steps most likely at fault, to repeat first

    @property
    def passed(self) -> bool:
        return not self.failures

    def repeat(self, all_steps: tuple[str, ...]) -> tuple[str, ...]:
        """Steps to measure again, in step order (all of them when a finding names none)."""
        named = {s for f in self.failures for s in (f.steps or all_steps)}
        first = [s for s in self.likely if s in named]
        return (*first, *(s for s in all_steps if s in named and s not in first))


class Judge:
    """Checks for one calibration: grid, kit models and the last cal's terms."""

    def __init__(self, freq_hz: np.ndarray, kit: CalKit, steps: tuple[Step, ...],
                 previous: OnePortTerms | None = None,
                 limits: CheckLimits | None = None) -> None:
        self.freq = np.asarray(freq_hz, np.float64)
        self.steps = steps
        self.previous = previous
        self.limits = limits or CheckLimits()
        self.models = {s.name: kit.reflection(s.name, self.freq) for s in steps if s.is_reflect}
        self.kinds = {s.name: s.kind for s in steps}

    def readings(self, held: Readings) -> Judgement:
        """Check every reading held so far (after each measurement)."""
        reflect = {s.name: held[s.name][REFLECTION] for s in self.steps
                   if s.is_reflect and s.name in held}
        found: list[Finding] = []
        figures: dict[str, Any] = {}
        if reflect:
            result = check_raw(self.freq, reflect, self.models, kinds=self.kinds,
                               previous=self.previous, limits=self.limits)
            found += result.findings
            figures.update(result.figures)
        for step in self.steps:
            if not step.is_reflect and step.name in held:
                found += self._thru(step, held, reflect, figures)
        likely = tuple(s for f in found if (s := self._likely(f, reflect)))
        previous_only = False
        if any(f.severity == FAIL for f in found) and self.previous is not None and reflect:
            alone = check_raw(self.freq, reflect, self.models, kinds=self.kinds,
                              limits=self.limits)
            thru_failed = any(f.check.startswith("thru") for f in found)
            previous_only = alone.passed and not thru_failed
        return _split(found, figures, previous_only, likely)

    def _likely(self, finding: Finding, reflect: Mapping[str, np.ndarray]) -> str | None:
        """For the same reading on a load step and an open or short step: which one is
        wrong, from raw levels (a load reads well below an open or short; common
        practice, as the hint in the finding's message)."""
        if finding.check != "same-reading" or len(finding.steps) != 2:
            return None
        pair = finding.steps
        others = [s for s in reflect if s not in pair and self.kinds.get(s) in _REFLECT_KINDS]
        if not others or any(self.kinds.get(s) not in _REFLECT_KINDS for s in pair):
            return None
        level = {s: float(np.median(np.abs(reflect[s]))) for s in (*pair, others[0])}
        top = max(max(level.values()), 1e-300)
        pair_low = 20 * np.log10(max(level[pair[0]], 1e-300) / top) < -self.limits.low_level_db
        wrong = [s for s in pair if (self.kinds[s] == "load") != pair_low]
        return wrong[0] if len(wrong) == 1 else None

    def terms(self, terms: OnePortTerms) -> Judgement:
        """Check solved reflection terms (alone and against the last cal)."""
        result = check_terms(self.freq, terms, previous=self.previous, limits=self.limits)
        judgement = _split(result.findings, result.figures)
        if not judgement.passed and self.previous is not None:
            alone = check_terms(self.freq, terms, limits=self.limits)
            if alone.passed:
                judgement = _split(result.findings, result.figures, previous_only=True)
        return judgement

    # -- thru ---------------------------------------------------------------------------
    def _thru(self, step: Step, held: Readings, reflect: Mapping[str, np.ndarray],
              figures: dict[str, Any]) -> list[Finding]:
        s21 = np.asarray(held[step.name][TRANSMISSION])
        level_db = 20 * np.log10(max(float(np.median(np.abs(s21))), 1e-300))
        figures[f"{step.name}_median_s21_db"] = level_db
        if level_db < THRU_MIN_DB:
            return [Finding("thru-level", FAIL, (step.name,),
                            f"the {step.label} step reads S21 at {level_db:.0f} dB (raw): nothing "
                            "seems to join the ports; connect the thru firmly, then repeat it",
                            1.0, level_db, 0.0, THRU_MIN_DB)]
        port1 = self._port1_terms(reflect)
        if port1 is None:
            return []
        s11 = np.abs(port1.correct(np.asarray(held[step.name][REFLECTION])))
        figures[f"{step.name}_max_s11"] = float(s11.max())
        over = ~(s11 <= THRU_MAX_S11)
        if over.mean() <= self.limits.max_fraction:
            return []
        k = int(np.argmax(np.where(np.isfinite(s11), s11, np.inf)))
        return [Finding("thru-match", FAIL, (step.name,),
                        f"on the {step.label} step port 1 sees |S11| = {s11[k]:.2f} at "
                        f"{format_frequency(float(self.freq[k]))} (limit {THRU_MAX_S11:g}): "
                        "the thru is loose or not connected at port 1; repeat it",
                        float(over.mean()), float(s11[k]), float(self.freq[k]), THRU_MAX_S11)]

    def _port1_terms(self, reflect: Mapping[str, np.ndarray]) -> OnePortTerms | None:
        names = [n for n in reflect if self.kinds[n] in _REFLECT_KINDS]
        if len(names) < 3:
            return None
        meas = np.stack([reflect[n] for n in names], axis=1)
        ideal = np.stack([self.models[n] for n in names], axis=1)
        try:
            return solve_one_port(meas, ideal, tuple(names), self.freq).terms
        except (CalError, ValueError):  # a singular set is reported by the raw checks
            return None


def _split(found: Any, figures: Mapping[str, Any], previous_only: bool = False,
           likely: tuple[str, ...] = ()) -> Judgement:
    failures = tuple(f for f in found if f.severity == FAIL)
    notes = tuple(f.message for f in found if f.severity != FAIL)
    return Judgement(failures, notes, dict(figures), previous_only and bool(failures), likely)
