"""The guided calibration: prompt each standard, measure, check, solve, verify, save.

The procedure walks the method's steps with a cursor. Every measurement is kept (in
memory and in the unfinished-calibration file) and all readings held so far are checked
together; the steps a failing check names are marked for repeating and the cursor goes to
the first of them. Going back, jumping to a step or redoing one never drops the other
readings. When every step is in, the terms are solved and checked, the residual errors
are printed, the optional verification runs, and (after a last confirmation) the cal set
is saved (that end is ``acquire.guided.finish``). An abort at any point saves no cal set;
the measured steps stay in the unfinished-calibration file for ``--resume``.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from acquire.calibration import (
    CalKit,
    CalSet,
    method,
)
from acquire.calibration.calset import AGAIN
from acquire.errors import CalError, StorageError
from acquire.guided.backends import STEP, Backend, Prompt
from acquire.guided.connectors import Connector, FixtureError
from acquire.guided.console import CAUTIONS, Console
from acquire.guided.finish import Finishing, Outcome
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
from acquire.guided.steps import ISOLATION, REFLECTION, Step
from acquire.guided.verify import VerifySpec
from acquire.units import format_frequency
from drivers.errors import SweepdError


class Aborted(CalError):
    """The procedure stopped before saving a cal set (technician's choice or give-up)."""


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


class Procedure(Finishing):
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
        if step.extra:
            lines.append("The analyzer's switch terms are read with it.")
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
        extra: dict[str, np.ndarray] = {}
        if step.extra:  # the switch terms, read in the same sweep
            sweep, extra = self.s.session.measure_with(step.extra, calibration_step=step.name)
        else:
            sweep = self.s.session.measure(calibration_step=step.name)
        self._grid(sweep.freq_hz)
        if self.partial.status.get(step.name) == REPEAT:
            self.retried.add(step.name)
        readings = {p: np.array(sweep.param(p)) for p in step.params}
        readings.update(extra)
        if step.reads_twice:
            again = self.s.session.measure(calibration_step=step.name + AGAIN)
            readings[step.reflection + AGAIN] = np.array(again.param(step.reflection))
        self.partial.readings[step.name] = readings
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
        port = next((s.port for s in self.s.steps if s.name == step), 0)
        if not self.method.two_port:
            port = 1 if port == 0 and position != "thru" else port
        try:
            self.s.connector.connect(position, port)
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

    # -- helpers ---------------------------------------------------------------------------
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


def _connect_line(step: Step, kit: str) -> str:
    """What the technician connects for ``step`` (by hand)."""
    if step.name == ISOLATION:
        return (f"Connect a LOAD ({kit}) at the reference plane of each port, then press "
                "Enter.")
    where = f"port {step.port} reference plane" if step.port == 2 else "reference plane"
    return (f"Connect the {step.standard.upper()} standard ({kit}) at the {where}, then "
            "press Enter.")
