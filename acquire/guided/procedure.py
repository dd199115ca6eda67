"""The guided calibration: prompt each standard, measure, check, solve, verify, save.

The procedure walks the method's steps with a cursor. Every measurement is kept (in
memory and in the unfinished-calibration file) and all readings held so far are checked
together; the steps a failing check names are marked for repeating and the cursor goes to
the first of them. Going back, jumping to a step or redoing one never drops the other
readings. When every step is in, the terms are solved and checked, the residual errors
are printed, the optional verification runs, and (after a last confirmation) the cal set
is saved. An abort at any point saves no cal set; the measured steps stay in the
unfinished-calibration file for ``--resume``.
"""

from __future__ import annotations

import contextlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from acquire.calibration import (
    CalKit,
    CalSet,
    ResidualEstimate,
    Verification,
    estimate_residuals,
    method,
    return_loss_error_range,
    solve,
    verify_check_standard,
)
from acquire.errors import CalError, StorageError
from acquire.guided import verify as verifying
from acquire.guided.backends import SAVE, STEP, VERIFY, Backend, Prompt
from acquire.guided.connectors import Connector, FixtureError
from acquire.guided.console import CAUTIONS, Console
from acquire.guided.judge import Judge, Judgement
from acquire.guided.keys import (
    ABORT,
    BACK,
    GOTO,
    IGNORE_LAST,
    KEEP,
    PROCEED,
    REDO,
    SKIP,
    Action,
)
from acquire.guided.partial import Partial, utc_text
from acquire.guided.progress import DONE, PENDING, REPEAT, progress_line
from acquire.guided.steps import ISOLATION, PORT, REFLECTION, Step, flat_readings
from acquire.guided.verify import VerifySpec
from acquire.units import format_frequency
from drivers.errors import SweepdError

EXAMPLE_RETURN_LOSS_DB = (10.0, 20.0)  # shown with the residual directivity


class Aborted(CalError):
    """The procedure stopped before saving a cal set (technician's choice or give-up)."""


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


@dataclass
class Setup:
    """Everything a procedure needs, gathered by ``acquire.guided.start``."""

    plan: Any  # acquire.plan.Plan
    session: Any  # acquire.capture.session.Session (open)
    kit: CalKit
    steps: tuple[Step, ...]
    connector: Connector
    backend: Backend
    console: Console
    cal_dir: Path
    partial: Partial
    partial_file: Path
    previous: CalSet | None = None
    verify: VerifySpec | None = None


class Procedure:
    """One guided calibration run (see the module docstring)."""

    def __init__(self, setup: Setup) -> None:
        self.s = setup
        self.spec = setup.plan.calibration
        self.method = method(self.spec.method)
        self.names = tuple(step.name for step in setup.steps)
        self.partial = setup.partial
        self.previous = setup.previous
        self.freq: np.ndarray | None = self.partial.freq_hz
        self.judge: Judge | None = None
        self.failures: dict[str, int] = {}
        self.problem = ""
        self.hint_ignore = False
        self.last_measured: int | None = None
        self.redo = False
        self.retried: set[str] = set()  # flagged steps measured again since their flagging
        self.verify_state = PENDING
        self.stage = "SAVE"  # where the procedure is once every step is in
        self.cursor = self._first_open()

    # -- main loop ---------------------------------------------------------------------------
    def run(self) -> Outcome:
        self._intro()
        try:
            while True:
                if self.cursor < len(self.s.steps):
                    self._step_prompt()
                    continue
                done = self._finish()
                if done is not None:
                    return done
        except Aborted as exc:
            self._say_kept()
            raise Aborted(f"{exc}; {self._kept_note()}") from None
        except KeyboardInterrupt:
            self.s.console.say("", "interrupted: no cal set saved")
            self._say_kept()
            raise
        except SweepdError:
            self._say_kept()
            raise

    def _intro(self) -> None:
        c, spec = self.s.console, self.spec
        c.say(f"Calibration of plan {self.s.plan.name}: {self.method.name} "
              f"({self.method.summary}), cal kit {self.s.kit.name}",
              f"Reference plane: {spec.reference_plane}.",
              "  Connect every standard exactly there; corrected results refer to that plane.",
              *CAUTIONS,
              f"Standards are connected {self.s.connector.description}; "
              f"{self.s.backend.description}.")
        if self.previous is not None:
            c.say(f"Readings are compared with the last calibration ({self.previous.when}).")
        held = [self.s.steps[i].label for i in range(len(self.s.steps))
                if self.names[i] in self.partial.readings]
        if held:
            c.say(f"Resuming: {', '.join(held)} already measured "
                  f"(updated {self.partial.updated_utc[:16]}Z).")

    # -- standards -------------------------------------------------------------------------
    def _step_prompt(self) -> None:
        index = self.cursor
        step = self.s.steps[index]
        if self.redo:
            self.redo = False
            self.s.console.say(self._title(index))
            self._measure(index, Action(PROCEED))
            return
        lines = []
        if self.s.connector.manual:
            lines.append(_connect_line(step, self.s.kit.name))
        else:
            lines.append(f"Enter connects the {step.label} standard and measures it.")
        if step.kind == "thru":
            lines.append("The thru joins port 1 and port 2 at their reference planes.")
        action = self.s.backend.ask(Prompt(STEP, self._title(index), tuple(lines),
                                           self._keys("Enter = measure"),
                                           self.failures.get(step.name, 0) + 1, self.problem))
        if action.kind == PROCEED:
            self._measure(index, action)
        else:
            self._navigate(action)

    def _measure(self, index: int, action: Action) -> None:
        step = self.s.steps[index]
        position = step.kind if action.connect is None else action.connect
        if not self._connect(position, step.name):
            return
        sweep = self.s.session.measure(calibration_step=step.name)
        self._grid(sweep.freq_hz)
        if self.partial.status.get(step.name) == REPEAT:
            self.retried.add(step.name)
        self.partial.readings[step.name] = {p: np.array(sweep.param(p)) for p in step.params}
        self.partial.measured_utc[step.name] = utc_text()
        self.partial.status[step.name] = DONE
        self.last_measured = index
        judgement = self._judge().readings(self.partial.readings)
        if judgement.passed:
            for name in self.partial.readings:
                self.partial.status[name] = DONE
            self.retried.clear()
            self.s.console.say(f"  {self.s.console.mark(True)} {step.label} measured "
                               "and plausible", *(f"  note: {n}" for n in judgement.notes))
            self.cursor = self._first_open()
        else:
            self._failed(judgement)
        self._save_partial()

    def _connect(self, position: str, step: str) -> bool:
        if position == KEEP:
            return True
        try:
            self.s.connector.connect(position)
        except FixtureError as exc:
            self.failures[step] = self.failures.get(step, 0) + 1
            self.problem = str(exc)
            self.s.console.say(f"  {self.s.console.mark(False)} {exc}",
                               "  Fix the fixture, then press Enter to try again.")
            return False
        if not self.s.connector.manual:
            self.s.console.say(f"  {position} connected")
        return True

    def _failed(self, judgement: Judgement) -> None:
        """Mark the named steps; go to the first one not yet measured again since it was
        named (a step that reads the same again is probably not the culprit)."""
        repeat = judgement.repeat(self.names)
        for name in repeat:
            self.partial.status[name] = REPEAT
            self.failures[name] = self.failures.get(name, 0) + 1
        candidates = [n for n in repeat if n not in self.retried]
        if not candidates:
            self.retried.clear()
            candidates = list(repeat)
        self.cursor = self.names.index(candidates[0]) if candidates else self._first_open()
        messages = [f.message for f in judgement.failures]
        self.problem = "; ".join(messages)
        self.hint_ignore = judgement.previous_only
        c = self.s.console
        c.say(*(f"  {c.mark(False)} {m}" for m in messages),
              *(f"  note: {n}" for n in judgement.notes),
              f"  Repeat: {', '.join(n.upper() for n in repeat)}.")
        if judgement.previous_only:
            c.say("  (These steps only disagree with the last calibration. If the test cable "
                  "or an adapter was changed on purpose, press i (or run with --no-compare) "
                  "to stop comparing with it.)")

    # -- navigation ------------------------------------------------------------------------
    def _navigate(self, action: Action) -> None:
        c, n = self.s.console, len(self.s.steps)
        if action.kind == ABORT:
            where = self.s.steps[self.cursor].label if self.cursor < n else self.stage
            why = f" ({action.reason})" if action.reason else ""
            raise Aborted(f"calibration aborted at {where}{why}: no cal set saved")
        if action.kind == BACK:
            self.cursor = max(0, min(self.cursor, n) - 1)
        elif action.kind == GOTO:
            if 1 <= action.step <= n:
                self.cursor = action.step - 1
            else:
                c.say(f"  there is no step {action.step} (steps 1 to {n})")
        elif action.kind == REDO:
            if self.last_measured is None:
                c.say("  nothing measured yet in this session: press Enter to measure")
            else:
                self.cursor, self.redo = self.last_measured, True
        elif action.kind == IGNORE_LAST:
            self._ignore_previous()
        elif action.kind == SKIP:
            c.say("  s skips only the verification")

    def _ignore_previous(self) -> None:
        c = self.s.console
        if self.previous is None:
            c.say("  no last calibration is being compared")
            return
        c.say(f"  no longer comparing with the last calibration ({self.previous.when})")
        self.previous = None
        self.hint_ignore = False
        if self.judge is not None:
            self.judge.previous = None
            if self.partial.readings and self.judge.readings(self.partial.readings).passed:
                for name in self.partial.readings:
                    self.partial.status[name] = DONE
                self._save_partial()
        self.cursor = self._first_open()

    # -- end: solve, residuals, verification, save ---------------------------------------------
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
        load = next((s.standard for s in self.s.steps if s.kind == "load"), None)
        ref = verifying.reference(spec, self._freq(), self.s.kit.reflection(load, self._freq())
                                  if load else None)
        allowed = verifying.tolerance(spec, ref, residual)
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
            corrected = model.correct(sweep).param(REFLECTION)
            last = verify_check_standard(self._freq(), corrected, ref, allowed,
                                         name=spec.name)
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

    # -- helpers ---------------------------------------------------------------------------
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

    def _judge(self) -> Judge:
        if self.judge is None:
            prev = self.previous.model.reflection.get(REFLECTION) if self.previous else None
            self.judge = Judge(self._freq(), self.s.kit, self.s.steps, prev)
        return self.judge

    def _freq(self) -> np.ndarray:
        if self.freq is None:
            raise CalError("no sweep measured yet")  # not reachable: steps measure first
        return self.freq

    def _grid(self, freq: np.ndarray) -> None:
        f = np.asarray(freq, np.float64)
        if self.freq is None:
            self.freq = f
            self.partial.freq_hz = f
        elif f.shape != self.freq.shape or not np.allclose(f, self.freq, rtol=1e-12, atol=0):
            raise CalError(f"the analyzer's frequency grid changed during the calibration "
                           f"({self.freq.size} points from {format_frequency(self.freq[0])} "
                           f"became {f.size} from {format_frequency(f[0])}): start again")

    def _first_open(self) -> int:
        for i, name in enumerate(self.names):
            if self.partial.status.get(name) != DONE or name not in self.partial.readings:
                return i
        return len(self.names)

    def _items(self) -> list[tuple[str, str]]:
        items = [(s.name, self.partial.status.get(s.name, PENDING)
                  if s.name in self.partial.readings else PENDING) for s in self.s.steps]
        if self.s.verify is not None:
            items.append(("verify", self.verify_state))
        return items

    def _title(self, index: int, title: str | None = None) -> str:
        position = index + 1 if title is None else index
        label = title or self.s.steps[index].label
        return progress_line(position, label, self._items(),
                             ascii_only=self.s.console.ascii_only)

    def _keys(self, first: str, *extra: str) -> str:
        keys = [first, *extra, "b = back", "r = redo last"]
        if self.hint_ignore:
            keys.append("i = ignore last cal")
        keys += ["a = abort", "? = help"]
        return "   ".join(keys)

    def _save_partial(self) -> None:
        try:
            self.partial.save(self.s.partial_file)
        except (OSError, StorageError) as exc:
            self.s.console.say(f"  note: cannot keep the measured steps in "
                               f"{self.s.partial_file} ({exc})")

    def _kept_note(self) -> str:
        if self.partial.readings and self.s.partial_file.exists():
            return (f"measured steps kept in {self.s.partial_file} "
                    "(run again with --resume to continue)")
        if self.s.partial_file.exists():  # an earlier run's steps, not replaced
            return (f"nothing was measured in this run; the earlier unfinished calibration "
                    f"in {self.s.partial_file} is untouched (--resume continues it)")
        return "nothing was measured"

    def _say_kept(self) -> None:
        if self.partial.readings and self.s.partial_file.exists():
            self.s.console.say(f"Measured steps kept in {self.s.partial_file}; "
                               "--resume continues from them.")


def _finding(check: str, message: str, steps: tuple[str, ...]) -> Any:
    from acquire.calibration import Finding
    from acquire.calibration.checks import FAIL

    return Finding(check, FAIL, steps, message)


def _connect_line(step: Step, kit: str) -> str:
    """What the technician connects for ``step`` (by hand)."""
    if step.name == ISOLATION:
        return (f"Connect a LOAD ({kit}) at the reference plane of each port, then press "
                "Enter.")
    where = f"port {step.port} reference plane" if step.port == 2 else "reference plane"
    return (f"Connect the {step.standard.upper()} standard ({kit}) at the {where}, then "
            "press Enter.")
