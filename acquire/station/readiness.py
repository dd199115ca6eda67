"""Is the station ready to measure: the instrument connected and a valid cal set.

Connecting waits for the operator while the instrument is not ready (Enter tries again,
``q`` quits); a missing, expired or mismatched cal set blocks measuring and offers the
calibration procedure right there. Faults are journalled in the shift's run.
"""

from __future__ import annotations

import contextlib
from datetime import datetime

from acquire.capture.calchoice import CalChoice, choose_calibration
from acquire.plan import Plan
from acquire.station.interrupts import QUIT, Quit
from acquire.station.serials import shown
from acquire.station.terminal import Terminal
from acquire.station.unit import Line
from acquire.units import format_duration
from drivers.errors import InstrumentError, SweepdError


class Readiness:
    """The instrument session and cal set of one shift's ``Line``."""

    def __init__(self, plan: Plan, resource: str | None, term: Terminal) -> None:
        self.plan = plan
        self.resource = resource
        self.term = term
        self.line: Line | None = None  # set when the shift's run starts

    def connect(self) -> None:
        """Open a session on the instrument, asking the operator until it answers."""
        from acquire.capture.session import Session

        while True:
            session = Session(self.plan, self.resource)
            try:
                session.open()
            except InstrumentError as exc:
                with contextlib.suppress(Exception):
                    session.close()
                self.line.journal.record_fault(self.line.run_id, type(exc).__name__, str(exc),
                                               action="waiting for the operator")
                self.term.say(self.term.paint(f"INSTRUMENT NOT READY: {exc}", "red+bold"),
                              "  check the cable, power and address; Enter tries again, "
                              "q quits")
                if (self.term.ask("instrument> ") or "q").strip().lower() in QUIT:
                    raise Quit from None
                continue
            self.line.session = session
            self.line.cal = None
            self.line.journal.update_run(self.line.run_id, instrument=session.identity_text)
            self.term.say(f"instrument {session.identity_text} at {session.resource}")
            return

    def close_session(self) -> None:
        """Close the line's session (errors while closing are of no interest)."""
        if self.line is not None and self.line.session is not None:
            with contextlib.suppress(Exception):
                self.line.session.close()
            self.line.session = None

    def cal_problem(self) -> str | None:
        """Choose the cal set, or check the chosen one is still valid (its age grows
        while the operator waits); the reason it cannot be used, or None."""
        line, spec = self.line, self.plan.calibration
        if spec is None:
            line.cal = line.cal or CalChoice()
            return None
        from acquire.calibration import ValidityPolicy, check_validity
        from acquire.errors import CalError

        try:
            if line.cal is None:
                line.cal = choose_calibration(self.plan, line.session)
                self.say_cal(line.cal)
            elif line.cal.calset is not None:
                check_validity(line.cal.calset, line.session.applied,
                               line.session.identity_text, policy=ValidityPolicy.from_spec(spec),
                               plan_ref=str(self.plan.source))
            return None
        except CalError as exc:
            line.cal = None
            return str(exc)

    def calibration_ok(self) -> bool:
        reason = self.cal_problem()
        if reason is None:
            return True
        self.term.say(self.term.paint(f"CANNOT MEASURE: {reason}", "red+bold"),
                      "  c = run the calibration procedure now   q = quit")
        answer = self.term.ask("cal> ")
        word = (answer or "").strip().lower()
        if answer is None or word in QUIT:
            raise Quit
        if word == "c":
            self.calibrate()
        else:
            self.term.say(f"REFUSED: {shown(answer)}: no valid calibration; answer c or q")
        return False

    def say_cal(self, cal: CalChoice) -> None:
        if cal.calset is None:
            self.term.say("calibration: none; measuring UNCORRECTED data", *cal.warnings)
            return
        c = cal.calset
        spec = self.plan.calibration
        left = f", valid for {format_duration(spec.max_age_s - c.age_s())} more" if spec else ""
        self.term.say(f"calibration {c.id} ({c.method}, {format_duration(c.age_s())} old"
                      f"{left})", *(f"  note: {w}" for w in cal.warnings))

    def cal_created(self) -> datetime | None:
        cal = self.line.cal
        return cal.calset.created if cal is not None and cal.calset is not None else None

    def calibrate(self, *, compare_last: bool = True) -> None:
        from acquire.guided import Options, calibrate

        if self.plan.calibration is None:
            self.term.say("this plan has no calibration section: nothing to calibrate")
            return
        self.close_session()
        options = Options(resource=self.resource, compare_last=compare_last)
        try:
            outcome = calibrate(self.plan, options, stdin=self.term,  # type: ignore[arg-type]
                                stdout=self.term.out)
            if outcome.saved is None:
                self.term.say("calibration NOT saved (the verification failed)")
        except SweepdError as exc:
            self.term.say(self.term.paint(f"calibration not completed: {exc}", "red+bold"))
        finally:
            self.connect()
