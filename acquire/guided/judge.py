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
  open end or a loose connector (a full two-port checks port 2 the same way, and its
  raw S12 as well as S21).

An isolation step (loads on both ports) must read its transmission below
``THRU_MIN_DB``: above it, something joins the ports. The switch terms an unknown-thru
step reads with its thru are reflections of a passive termination: |Γ| at or above 1 on
more than the allowed share of points means the dialect points at the wrong traces.

A full two-port reads open, short and load at each port and keeps both reflections of
every reflect step. Where one port's readings cannot be told apart (the same reading
twice) while the other port's readings of the same steps can, the standards went to the
other port: the finding says the ports are swapped (common practice).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from acquire.calibration import CalKit, CheckLimits, Finding, check_raw, check_terms
from acquire.calibration.checks import FAIL
from acquire.calibration.model import OnePortTerms, solve_one_port
from acquire.errors import CalError
from acquire.guided.steps import ISOLATION, REFLECTION, TRANSMISSION, Step
from acquire.units import format_frequency

THRU_MIN_DB = -30.0  # common practice: a joined thru reads far above this raw level
THRU_MAX_S11 = 0.5  # common practice: same limit as the load residual
SWITCH_MAX = 1.0  # a passive termination reflects at most what it receives
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
        self.models = {s.name: kit.reflection(s.standard, self.freq)
                       for s in steps if s.is_reflect}
        self.kinds = {s.name: s.kind for s in steps}

    def _reflect(self, held: Readings, port: int) -> dict[str, np.ndarray]:
        return {s.name: held[s.name][s.reflection] for s in self.steps
                if s.is_reflect and s.port == port and s.name in held}

    def readings(self, held: Readings) -> Judgement:
        """Check every reading held so far (after each measurement)."""
        reflect = self._reflect(held, 1)
        reflect2 = self._reflect(held, 2)
        found: list[Finding] = []
        figures: dict[str, Any] = {}
        for port, readings in ((1, reflect), (2, reflect2)):
            if not readings:
                continue
            result = check_raw(self.freq, readings, self.models, kinds=self.kinds,
                               previous=self.previous if port == 1 else None,
                               limits=self.limits)
            swapped = swapped_ports(self.freq, self.steps, held, port, result.findings)
            found += [swapped] if swapped else result.findings
            figures.update(result.figures if port == 1 else
                           {f"port2_{k}": v for k, v in result.figures.items()})
        for step in self.steps:
            if step.name == ISOLATION and step.name in held:
                found += _isolation(step, held[step.name], figures)
            if not step.is_reflect and step.name in held:
                thru = self._thru(step, held, reflect, figures)
                found += thru or self._switch_terms(step, held[step.name], figures)
                if step.port == 0 and "S22" in step.params:
                    found += self._thru_port2(step, held, reflect2, figures)
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

    def terms(self, terms: OnePortTerms, port: int = 1) -> Judgement:
        """Check solved reflection terms (alone and, at port 1, against the last cal)."""
        if port != 1:  # the findings name kit roles: point them at this port's steps
            result = check_terms(self.freq, terms, limits=self.limits)
            steps = {s.kind: s.name for s in self.steps if s.is_reflect and s.port == port}
            found = [replace(f, steps=tuple(steps.get(n, n) for n in f.steps))
                     for f in result.findings]
            return _split(found, {f"port{port}_{k}": v for k, v in result.figures.items()})
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

    def _switch_terms(self, step: Step, readings: Mapping[str, np.ndarray],
                      figures: dict[str, Any]) -> list[Finding]:
        """The switch terms read with the thru are passive reflections (|Γ| < 1)."""
        for name in step.extra:
            gamma = np.abs(np.asarray(readings[name]))
            figures[f"{step.name}_max_{name}"] = float(gamma.max())
            over = ~(gamma < SWITCH_MAX)
            if over.mean() <= self.limits.max_fraction:
                continue
            k = int(np.argmax(np.where(np.isfinite(gamma), gamma, np.inf)))
            return [Finding("switch-terms", FAIL, (step.name,),
                            f"on the {step.label} step the switch term {name} reads |Γ| = "
                            f"{gamma[k]:.2f} at {format_frequency(float(self.freq[k]))}: no "
                            "passive termination reflects more than it receives; check the "
                            "dialect's data.switch_terms, then repeat it",
                            float(over.mean()), float(gamma[k]), float(self.freq[k]),
                            SWITCH_MAX)]
        return []

    def _thru_port2(self, step: Step, held: Readings, reflect2: Mapping[str, np.ndarray],
                    figures: dict[str, Any]) -> list[Finding]:
        """The reverse twin of ``_thru``: raw S12 level and port 2's corrected match."""
        mirrored = {"S21": held[step.name]["S12"], "S11": held[step.name]["S22"]}
        port2 = self._port1_terms(reflect2)
        findings = []
        for f in self._thru(step, {step.name: mirrored}, {}, {}):
            findings.append(Finding(f.check, f.severity, f.steps, f.message.replace(
                "S21", "S12"), f.fraction, f.worst, f.worst_hz, f.limit))
        if port2 is None or findings:
            return findings
        s22 = np.abs(port2.correct(np.asarray(held[step.name]["S22"])))
        figures[f"{step.name}_max_s22"] = float(s22.max())
        over = ~(s22 <= THRU_MAX_S11)
        if over.mean() <= self.limits.max_fraction:
            return []
        k = int(np.argmax(np.where(np.isfinite(s22), s22, np.inf)))
        return [Finding("thru-match", FAIL, (step.name,),
                        f"on the {step.label} step port 2 sees |S22| = {s22[k]:.2f} at "
                        f"{format_frequency(float(self.freq[k]))} (limit {THRU_MAX_S11:g}): "
                        "the thru is loose or not connected at port 2; repeat it",
                        float(over.mean()), float(s22[k]), float(self.freq[k]), THRU_MAX_S11)]

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


def swapped_ports(freq: np.ndarray, steps: tuple[Step, ...], held: Readings, port: int,
                  findings: Any) -> Finding | None:
    """A 'ports swapped' finding when ``port``'s readings repeat (same-reading failures)
    but the other port's readings of the same steps are told apart."""
    same = [f for f in findings if f.severity == FAIL and f.check == "same-reading"]
    if not same:
        return None
    other = "S22" if port == 1 else "S11"
    mine = [s for s in steps if s.is_reflect and s.port == port and s.name in held
            and other in held[s.name]]
    if len(mine) < 2:
        return None
    values = [np.asarray(held[s.name][other]) for s in mine]
    scale = max(float(np.median(np.abs(v))) for v in values) or 1.0
    apart = min(float(np.median(np.abs(a - b))) for i, a in enumerate(values)
                for b in values[i + 1:])
    if apart < 0.1 * scale:  # the other port did not change either: not a swap
        return None
    names = tuple(s.name for s in mine)
    return Finding("ports-swapped", FAIL, names,
                   f"the port {port} standards read the same at port {port} but change at "
                   f"port {3 - port}: they went to port {3 - port}; connect each standard at "
                   f"port {port} and repeat {', '.join(n.upper() for n in names)}",
                   1.0, apart, float(freq[0]), 0.1 * scale)


def _isolation(step: Step, readings: Mapping[str, np.ndarray], figures: dict[str, Any]
               ) -> list[Finding]:
    """Loads on both ports transmit nothing: a raw level near a thru's is a thru left in."""
    for param, values in readings.items():
        level_db = 20 * np.log10(max(float(np.median(np.abs(values))), 1e-300))
        figures[f"{step.name}_median_{param.lower()}_db"] = level_db
        if level_db >= THRU_MIN_DB:
            return [Finding("isolation-level", FAIL, (step.name,),
                            f"the {step.label} step reads {param} at {level_db:.0f} dB (raw): "
                            "something joins the ports; connect a load at each port, then "
                            "repeat it", 1.0, level_db, 0.0, THRU_MIN_DB)]
    return []
