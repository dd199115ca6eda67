"""The operator loop of ``sweepd station``: one shift at one fixture.

Start: the plan, the cautions, the station id, the instrument, the cal set and its age.
A missing, expired or mismatched cal set blocks measuring, and the calibration procedure
is offered right there. A golden check is asked for at the start of the shift and
whenever the schedule says so (``acquire.station.schedule``); a failing one stops the
line until a recalibration or a good re-check. Then, per unit: the serial (checked), the
sweep, the verdict in big letters with the worst margin and key figures, the files, the
shift's counters. A retest is recorded as attempt 2, 3, ... beside the first file.

Prompts end in ``> `` and accept ``q`` (quit); end of input also ends the shift, as
does Ctrl-C (held while files are written, so nothing half-written is left; a unit whose
sweep was interrupted is journalled as missed). Instrument faults are journalled, the
unit is reported as not measured, and the station reconnects.
"""

from __future__ import annotations

import shlex
from dataclasses import dataclass
from pathlib import Path

from acquire.journal import JOURNAL_NAME, JournalStore, journal_in
from acquire.journal.labels import check_lot, check_operator
from acquire.journal.owner import RunOwner, settle_dead_runs
from acquire.plan import Plan
from acquire.station.config import StationConfig, check_station_id, station_config
from acquire.station.counters import run_yield
from acquire.station.display import banner, unit_lines
from acquire.station.errors import SerialRefused, StationError
from acquire.station.figures import worst_violation
from acquire.station.folder_lock import StationLock
from acquire.station.hold import handle_indeterminate
from acquire.station.hooks import LineHooks
from acquire.station.interrupts import QUIT, Quit, deferred_interrupt, terminate_as_interrupt
from acquire.station.readiness import Readiness
from acquire.station.schedule import line_state
from acquire.station.serials import check_serial, shown
from acquire.station.swap import SwapGuard, confirm_step
from acquire.station.terminal import Terminal
from acquire.station.unit import Line, UnitResult, measure_unit, save_fail_plot
from acquire.storage import sweep_stale_temps
from drivers.errors import InstrumentError, SweepdError

CAUTIONS = (
    "CAUTION: never connect the test port to a line that carries, or may carry, transmitter "
    "power or DC.",
    "CAUTION: ESD - ground yourself and discharge cables before connecting them to the port.",
)
HELP = (
    "At 'serial>' scan or type the unit's serial, then Enter. Other answers:",
    "  g  golden check now     c  calibrate now     s  counters     ?  this help",
    "  q  quit (end of input and Ctrl-C also end the shift; nothing saved is lost)",
)
@dataclass(frozen=True)
class StationOptions:
    resource: str | None = None
    station_id: str | None = None
    operator: str | None = None
    lot: str | None = None
    out_dir: Path | None = None


class Station:
    """One shift (see the module docstring); ``run()`` returns the exit code."""

    def __init__(self, plan: Plan, options: StationOptions = StationOptions(),
                 term: Terminal | None = None) -> None:
        self.plan = plan
        self.config: StationConfig = station_config(plan)
        if not plan.checks:
            raise StationError(f"plan {plan.source}: has no checks; a station judges every "
                               "unit, so give the plan a checks: section")
        self.options = options
        self.term = term or Terminal()
        self.out_dir = options.out_dir or plan.output.dir
        self.resource = options.resource or plan.instrument.resource
        check_operator(options.operator)
        check_lot(options.lot)
        self.reference = None
        if self.config.golden is not None:
            from acquire.station.golden import load_reference

            self.reference = load_reference(self.config.golden, plan)
        self.line: Line | None = None
        self.start_check_done = self.config.golden is None or not self.config.golden.at_start
        self.stop_shown = ""  # the stop reason already shown in full
        self.swap = SwapGuard()  # a unit left on the fixture under a new label
        self.hooks = LineHooks(self.config.hooks, {"plan": plan.name}, self.term.say)
        self.readiness = Readiness(plan, self.resource, self.term)

    # -- the shift -------------------------------------------------------------------------
    def run(self) -> int:
        """The shift, holding the output folder for its whole life (one station per
        folder; a second one is refused with one line naming the holder)."""
        given = self.options.station_id or self.config.station_id or ""
        with StationLock(self.out_dir).acquire(given):
            return self._run()

    def _run(self) -> int:
        self._intro()
        station_id = self._station_id()
        if station_id is None:
            return 0
        code, state, note = 0, "finished", None
        with journal_in(self.out_dir, location=self.plan.output.journal) as journal, \
                RunOwner(self.out_dir) as owner, terminate_as_interrupt():
            self._recover(journal)
            run_id = journal.start_run(
                "station", self.plan.name, plan_path=str(self.plan.source), station=station_id,
                operator=self.options.operator, lot=self.options.lot, resource=self.resource,
                **owner.fields())
            self.line = Line(self.plan, self.config, self.out_dir, journal, run_id, station_id,
                             reference=self.reference)
            self.readiness.line = self.line
            self.hooks.common["station"] = station_id
            self.hooks.fault = lambda text: journal.record_fault(
                run_id, "HookFailed", text, action="measuring goes on")
            try:
                self._shift()
            except KeyboardInterrupt:
                code, state, note = 130, "stopped", "interrupted (Ctrl-C or a signal)"
                self.term.say("", "interrupted: the shift ends; everything measured and saved "
                              "so far is kept")
            except SweepdError as exc:
                code, state, note = 2, "failed", str(exc)
                journal.record_fault(run_id, type(exc).__name__, str(exc),
                                     action="station stopped")
                raise
            finally:
                with deferred_interrupt():
                    self.readiness.close_session()
                    journal.end_run(run_id, state, note)
                    self._goodbye(journal, run_id)
        return code

    def _shift(self) -> None:
        try:
            self.readiness.connect()
            while True:
                if self._ready():
                    self._answer(self.term.ask("serial> "))
        except Quit:
            return

    def _ready(self) -> bool:
        """Calibration valid, line not stopped, no golden check due; else deal with it."""
        assert self.line is not None
        if not self.readiness.calibration_ok():
            return False
        golden = self.config.golden
        if golden is None:
            return True
        if not self.start_check_done:
            self._golden("start of the shift")
            return False
        state = line_state(self.line.journal, self.plan.name, golden,
                           cal_created=self.readiness.cal_created())
        if state.stopped:
            self._stopped(state.stop_reason)
            return False
        if state.due:
            self._golden(state.due_reason)
            return False
        self.hooks.line_ready()
        return True

    def _answer(self, answer: str | None) -> None:
        word = (answer or "").strip().lower() if answer is not None else "q"
        if word in QUIT:
            raise Quit
        if word in ("?", "help", "h"):
            self.term.say(*HELP)
        elif word == "s":
            self.term.say(f"  {run_yield(self.line.journal, self.line.run_id).line()}")
        elif word == "c":
            self.readiness.calibrate()
        elif word == "g" and self.config.golden is not None:
            self._golden("on request")
        else:
            self._unit(answer or "")

    # -- units -------------------------------------------------------------------------------
    def _unit(self, text: str) -> None:
        try:
            serial = check_serial(text, self.config.serial)
        except SerialRefused as exc:
            self.term.say(self.term.paint(f"REFUSED: {exc}", "red+bold"),
                          "  nothing was measured; scan the unit's label again (? for help)")
            return
        golden = self.config.golden
        if golden is not None and serial == golden.serial:
            self._golden("on request")
            return
        if self.readiness.cal_problem() is not None:
            self.term.say(f"{serial} was NOT measured: the calibration is no longer valid")
            return
        before = self.line.journal.attempts(self.plan.name, serial)
        if before:
            self.term.say(f"RETEST: {serial} was measured {before} time(s) before; this is "
                          f"attempt {before + 1}, kept beside the earlier file(s)")
        self.term.say(f"measuring {serial} ...")
        result = self._measure(serial, confirm=confirm_step(self.swap, serial, self.term.say,
                                                            self.term.ask))
        if result is not None:
            self.swap.remember(serial, result.capture.sweep)
        if result is not None and result.verdict == "indeterminate":
            if not handle_indeterminate(self, serial, result, QUIT):
                raise Quit
        elif result is not None:
            self._show(result)

    def _measure(self, serial: str, *, golden: bool = False,
                 confirm=None) -> UnitResult | None:
        line = self.line
        seq = line.journal.next_seq(line.run_id)
        try:
            return measure_unit(line, serial, golden=golden, confirm=confirm)
        except KeyboardInterrupt:
            with deferred_interrupt():
                if line.journal.record_missed(line.run_id, [seq], "interrupted during the "
                                              "sweep; nothing stored", serial=serial):
                    self.term.say("", f"{serial} was NOT measured (interrupted during the "
                                  "sweep); nothing was saved for it")
            raise
        except InstrumentError as exc:
            line.journal.record_fault(line.run_id, type(exc).__name__, str(exc), seq=seq,
                                      action="unit not measured; reconnecting")
            line.journal.record_missed(line.run_id, [seq], f"instrument fault: {exc}",
                                       serial=serial)
            self.term.say(*banner("error", self.term.paint),
                          f"INSTRUMENT FAULT: {exc}",
                          f"  {serial} was NOT measured and nothing was saved for it; "
                          "it must be measured again")
            self.readiness.close_session()
            self.readiness.connect()
            return None

    def _show(self, result: UnitResult, key: str | None = None) -> None:
        verdict = result.capture.verdict
        key = key or (result.verdict if result.verdict in ("pass", "fail") else "error")
        failing = [r.summary for r in verdict.results if r.verdict != "pass"]
        stored = result.stored
        files = [str(p) for p in (stored.touchstone, stored.summary) if p is not None]
        why = worst_violation(verdict) if result.verdict != "pass" else None
        plot = self._fail_plot(result, why) if result.verdict == "fail" else None
        lines = unit_lines(result.serial, result.verdict, result.attempt,
                           result.figures.worst_margin, result.figures.worst_where,
                           result.figures.line(), failing, files + ([str(plot)] if plot else []),
                           run_yield(self.line.journal, self.line.run_id), why=why)
        self.term.say(*banner(key, self.term.paint), *lines)
        self.hooks.unit(serial=result.serial, verdict=result.verdict,
                        touchstone=stored.touchstone, summary=stored.summary, plot=plot)

    def _fail_plot(self, result: UnitResult, why: str | None) -> Path | None:
        """The small plot of a failing unit; a plot that cannot be made never stops the line."""
        try:
            return save_fail_plot(result, self.plan, why)
        except (OSError, SweepdError, ValueError) as exc:
            self.term.say(f"  note: no plot for {result.serial}: {exc}")
            return None

    # -- golden unit -----------------------------------------------------------------------
    def _golden(self, why: str) -> None:
        golden = self.config.golden
        assert golden is not None
        self.term.say(f"GOLDEN CHECK ({why}): put the golden unit {golden.serial} on the "
                      "fixture, then press Enter (or scan its label); c calibrates, q quits")
        answer = self.term.ask("golden> ")
        word = (answer or "").strip()
        if answer is None or word.lower() in QUIT:
            raise Quit
        if word.lower() == "c":
            self.readiness.calibrate()
            return
        if word.lower() in ("?", "help", "h"):
            self.term.say(*HELP)
            return
        if word not in ("", golden.serial):
            self.term.say(f"REFUSED: {shown(word)} is not the golden unit {golden.serial}; "
                          "the golden check comes first")
            return
        if self.readiness.cal_problem() is not None:
            return  # the loop shows why and offers the calibration
        self.term.say(f"measuring golden unit {golden.serial} ...")
        result = self._measure(golden.serial, golden=True)
        if result is None or result.golden_result is None:
            return
        self.swap.remember_golden(golden.serial, result.capture.sweep)
        check = result.golden_result
        if check.passed:
            self.start_check_done = True
            self.term.say(*banner("ok", self.term.paint), f"  GOLDEN CHECK PASSED: "
                          f"{check.message}", f"  file {result.stored.touchstone}")
            return
        self.line.journal.record_fault(self.line.run_id, "GoldenCheckFailed", check.message,
                                       action="line stopped")
        self.stop_shown = self._stop_reason()
        self.term.say(*banner("stop", self.term.paint), f"LINE STOPPED: {check.message}",
                      f"  file {result.stored.touchstone}")
        self.hooks.line_stopped(check.message)

    def _stop_reason(self) -> str:
        state = line_state(self.line.journal, self.plan.name, self.config.golden,
                           cal_created=self.readiness.cal_created())
        return state.stop_reason

    def _stopped(self, reason: str) -> None:
        if reason != self.stop_shown:  # the full reason once per stop, then short
            self.term.say(self.term.paint(f"LINE STOPPED: {reason}", "red+bold"))
            self.stop_shown = reason
        self.hooks.line_stopped(reason)
        self.term.say("  no unit is measured until a good golden re-check or a recalibration:",
                      "  g = re-check the golden unit   c = recalibrate   q = quit")
        answer = self.term.ask("stopped> ")
        word = (answer or "").strip().lower()
        if answer is None or word in QUIT:
            raise Quit
        if word == "g" or (self.config.golden and word == self.config.golden.serial.lower()):
            self._golden("re-check")
        elif word == "c":
            # the golden check says the setup moved: the new calibration must not be
            # judged against the last one, which was made before the move
            self.readiness.calibrate(compare_last=False)
        else:
            self.term.say(f"REFUSED: {shown(answer)}: the line is stopped; answer g, c or q")

    # -- start and end -----------------------------------------------------------------------
    def _intro(self) -> None:
        plan = self.plan
        about = f" ({plan.description})" if plan.description else ""
        golden = self.config.golden
        self.term.say(f"sweepd station: plan {plan.name}{about}", *CAUTIONS,
                      f"output {self.out_dir} (journal {self.out_dir / JOURNAL_NAME})",
                      f"serials: pattern {self.config.serial.pattern}, at most "
                      f"{self.config.serial.max_length} characters"
                      + (f"; {golden.describe()}" if golden else ""),
                      "answers: q quit, g golden check, c calibrate, s counters, ? help")

    def _station_id(self) -> str | None:
        given = self.options.station_id or self.config.station_id
        if given is not None:
            return check_station_id(given)
        while True:
            answer = self.term.ask("station id> ")
            if answer is None or answer.strip().lower() in QUIT:
                return None
            try:
                return check_station_id(answer.strip())
            except StationError as exc:
                self.term.say(f"REFUSED: {exc}")

    def _recover(self, journal: JournalStore) -> None:
        """Close earlier runs in this folder whose process is gone (killed, power cut):
        settle their pending rows and mark them crashed."""
        stale, changed = settle_dead_runs(journal, self.out_dir)
        if stale:
            adopted = sum(1 for _, state in changed if state == "stored")
            self.term.say(f"journal: {stale} earlier run(s) ended without closing; "
                          f"{len(changed)} pending measurement(s) settled ({adopted} adopted, "
                          f"{len(changed) - adopted} interrupted)")
        sweep_stale_temps(self.out_dir)  # temp files of writers that died mid-write

    def _goodbye(self, journal: JournalStore, run_id: int) -> None:
        self.term.say(f"shift ended: {run_yield(journal, run_id).line()}",
                      f"files in {self.out_dir}; journal {journal.where}",
                      f"statistics: {shlex.join(['sweepd', 'summary', str(self.out_dir)])}")
