"""The end of a guided calibration: solve and check the terms, print the residual errors,
run the optional verification, and save the cal set (``Finishing``, a part of
``acquire.guided.procedure.Procedure``; it uses the procedure's state and prompts).
"""

from __future__ import annotations

import contextlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from acquire.calibration import (
    CalSet,
    ResidualEstimate,
    Verification,
    estimate_residuals,
    return_loss_error_range,
    solve,
    verify_check_standard,
)
from acquire.errors import CalError
from acquire.guided import verify as verifying
from acquire.guided.backends import SAVE, VERIFY, Prompt
from acquire.guided.connectors import FixtureError
from acquire.guided.judge import Judgement
from acquire.guided.keys import ABORT, PROCEED, SKIP
from acquire.guided.progress import DONE, PENDING, REPEAT
from acquire.guided.steps import ISOLATION, PORT, REFLECTION, flat_readings

EXAMPLE_RETURN_LOSS_DB = (10.0, 20.0)  # shown with the residual directivity


@dataclass
class Outcome:
    """What a finished procedure produced."""

    saved: Path | None
    calset: CalSet | None
    residual: ResidualEstimate | None = None
    verification: Verification | None = None
    figures: dict[str, Any] = field(default_factory=dict)

    @property
    def exit_code(self) -> int:
        return 0 if self.saved is not None else 1


class Finishing:
    """Solve, residuals, verification and save; mixed into ``Procedure``."""

    s: Any  # the procedure's Setup, and the state below, come from Procedure

    def _finish(self) -> Outcome | None:
        solved = self._solve()
        if solved is None:
            return None
        solution, term_judgement = solved
        residual = self._residual()
        verification = None
        if self.s.verify is not None:
            verification = self._verification(solution.model, residual)
            if self.cursor < len(self.s.steps):
                return None
            if verification is not None and not verification.passed:
                return Outcome(None, None, residual, verification,
                               {"verification": verification.as_dict()})
        self.stage = "SAVE"
        while True:
            action = self.s.backend.ask(Prompt(
                SAVE, self._title(0, "SAVE"), ("All steps are in. Enter saves the cal set.",),
                self._keys("Enter = save")))
            if action.kind == PROCEED:
                figures = self._figures(solution, term_judgement, residual, verification)
                return self._save(solution.model, figures, residual, verification)
            self._navigate(action)
            if self.cursor < len(self.s.steps):
                return None

    def _solve(self) -> tuple[Any, Judgement | None] | None:
        flat = flat_readings(self.s.steps, self.partial.readings)
        try:
            iso = next((f"{s.standard}.{s.params[0]}" for s in self.s.steps
                        if s.name == ISOLATION), None)
            solution = solve(self.method.name, self._freq(), flat, self.s.kit, port=PORT,
                             standards=tuple(s.standard for s in self.s.steps
                                             if s.name != ISOLATION), isolation=iso)
        except CalError as exc:
            self._failed(Judgement((_finding("solve", str(exc), self.names),)))
            self._save_partial()
            return None
        terms = solution.model.reflection.get(REFLECTION)
        judgement = self._judge().terms(terms) if terms is not None else None
        if judgement is not None and judgement.passed and "S22" in solution.model.reflection:
            judgement = self._judge().terms(solution.model.reflection["S22"], port=2)
        if judgement is not None and not judgement.passed:
            self._failed(judgement)
            self._save_partial()
            return None
        c = self.s.console
        c.say(f"  {c.mark(True)} error terms solved ({self.method.name}) and plausible",
              *(f"  note: {n}" for n in (judgement.notes if judgement else ())))
        if judgement is not None and "max_tracking_change_db" in judgement.figures:
            c.say(f"  reflection tracking moved by at most "
                  f"{judgement.figures['max_tracking_change_db']:.2f} dB since the last "
                  "calibration")
        return solution, judgement

    def _residual(self) -> ResidualEstimate | None:
        c = self.s.console
        if not self.method.full_reflection:
            c.say(f"Residual errors: {self.method.name} leaves directivity and source match "
                  "uncorrected; only a full one-port calibration removes them.")
            return None
        by_kind = {s.kind: s.standard for s in self.s.steps if s.is_reflect}
        models = {k: self.s.kit.reflection(by_kind[k], self._freq())
                  for k in ("open", "short", "load")}
        estimate = estimate_residuals(self._freq(), models)
        c.say("Residual errors after calibration (estimated from the kit model tolerances):",
              *(f"  {line}" for line in estimate.lines()))
        for rl in EXAMPLE_RETURN_LOSS_DB:
            margin = -estimate.directivity_db - rl
            if margin > 0:
                lo, hi = return_loss_error_range(margin)
                c.say(f"  a {rl:g} dB return loss reads within {lo:+.2f} to {hi:+.2f} dB "
                      "(directivity alone)")
        return estimate

    def _verification(self, model: Any, residual: ResidualEstimate | None
                      ) -> Verification | None:
        spec = self.s.verify
        assert spec is not None
        two_port = self.method.two_port and not spec.uses_load
        load = next((s.standard for s in self.s.steps if s.kind == "load"), None)
        ref = None if two_port else verifying.reference(
            spec, self._freq(), self.s.kit.reflection(load, self._freq()) if load else None)
        allowed = 0.0 if ref is None else verifying.tolerance(spec, ref, residual)
        if two_port:  # an unusable reference file is reported before anything is measured
            verifying.reference(spec, self._freq(), None, "S21")
        attempts = 0
        last: Verification | None = None
        self.verify_state = PENDING
        self.stage = "VERIFY"
        while True:
            lines = (f"Verification: connect {spec.label} at the reference plane, then press "
                     "Enter." if self.s.connector.manual else
                     f"Verification: Enter connects {spec.label} and measures it.",)
            action = self.s.backend.ask(Prompt(
                VERIFY, self._title(len(self.s.steps) + 1, "VERIFY"), lines,
                self._keys("Enter = measure", "s = skip"), attempts + 1, self.problem))
            if action.kind == SKIP and last is not None:
                self.s.console.say("  the verification failed, so it cannot be skipped: measure "
                                   "it again, repeat a step, or abort")
                continue
            if action.kind == SKIP:
                self.s.console.say("  verification skipped")
                return None
            if action.kind == ABORT and action.reason and last is not None:
                return last  # unattended: gave up on a failing verification
            if action.kind != PROCEED:
                self._navigate(action)
                if self.cursor < len(self.s.steps):
                    return None
                continue
            position = spec.position if action.connect is None else action.connect
            if not self._connect(position, "verify"):
                attempts += 1
                continue
            sweep = self.s.session.measure(calibration_step="verify")
            self._grid(sweep.freq_hz)
            if ref is None:
                fixed = model.correct(sweep)
                last = verifying.verify_two_port(spec, self._freq(), {
                    p: fixed.param(p) for p in ("S11", "S21", "S12", "S22")}, residual)
            else:
                last = verify_check_standard(self._freq(), model.correct(sweep).param(
                    REFLECTION), ref, allowed, name=spec.name)
            c = self.s.console
            c.say(f"  {c.mark(last.passed)} verification "
                  f"{'passed' if last.passed else 'FAILED'}: {last.message}")
            self.verify_state = DONE if last.passed else REPEAT
            if last.passed:
                return last
            attempts += 1
            self.problem = last.message

    def _save(self, model: Any, figures: dict[str, Any], residual: ResidualEstimate | None,
              verification: Verification | None) -> Outcome:
        flat = flat_readings(self.s.steps, self.partial.readings)
        calset = CalSet(
            plan=self.s.plan.name, model=model, stimulus=self.s.session.applied,
            instrument=self.s.session.identity_text, kit_name=self.s.kit.name,
            kit_sha256=self.s.kit.sha256, reference_plane=self.spec.reference_plane, port=PORT,
            raw=flat, figures=figures,
        )
        path = calset.save(self.s.cal_dir)
        with contextlib.suppress(OSError):
            self.s.partial_file.unlink(missing_ok=True)
        c = self.s.console
        c.say(f"Cal set {calset.id} saved: {path}")
        if not self.s.connector.manual:
            try:
                self.s.connector.connect("device")
                c.say("  fixture switched back to the device")
            except FixtureError as exc:
                c.say(f"  note: could not switch back to the device: {exc}")
        return Outcome(path, calset, residual, verification, figures)

    def _figures(self, solution: Any, terms: Judgement | None,
                 residual: ResidualEstimate | None, verification: Verification | None
                 ) -> dict[str, Any]:
        raw_checks = self._judge().readings(self.partial.readings)
        return {
            "solve": dict(solution.figures),
            "checks": dict(raw_checks.figures),
            "terms": dict(terms.figures) if terms is not None else {},
            "residual": residual.as_dict() if residual is not None else None,
            "verification": verification.as_dict() if verification is not None else None,
            "previous_cal": self.previous.id if self.previous is not None else None,
            "prompt": self.s.backend.name,
            "failed_attempts": dict(self.failures),
        }


def _finding(check: str, message: str, steps: tuple[str, ...]) -> Any:
    from acquire.calibration import Finding
    from acquire.calibration.checks import FAIL

    return Finding(check, FAIL, steps, message)
