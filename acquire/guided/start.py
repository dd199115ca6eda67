"""Setting up a guided calibration from a plan and command-line options, then running it.

Backends (``calibration.prompt`` in the plan, or ``--prompt``):

    terminal   the technician connects each standard and answers line prompts
    command    an external command connects each standard (``calibration.switch.command``);
               unattended unless ``confirm``
    switch     the analyzer's automatic standard switch (its dialect's ``switch`` section);
               unattended unless ``confirm``
    scripted   a script of what the 'technician' connects and presses at each step
               (``script``), through the switch command when the plan has one, else the
               analyzer's switch; after the script, unattended
"""

from __future__ import annotations

import os
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import TextIO

from acquire.calibration import METHODS, CalSet, canonical_name, list_calsets, load_kit, method
from acquire.errors import CalError, StorageError
from acquire.guided.backends import AutoBackend, Backend, ScriptedBackend, TerminalBackend
from acquire.guided.connectors import (
    CommandConnector,
    Connector,
    ManualConnector,
    SwitchConnector,
)
from acquire.guided.console import Console
from acquire.guided.keys import parse_script
from acquire.guided.partial import Fingerprint, Partial, load_partial, partial_path, readings_fit
from acquire.guided.procedure import Outcome, Procedure, Setup
from acquire.guided.steps import build_steps
from acquire.guided.verify import VerifySpec
from acquire.plan import PROMPTS, Plan


@dataclass(frozen=True)
class Options:
    """Command-line choices; None means 'as the plan says'."""

    resource: str | None = None
    prompt: str | None = None
    switch_command: str | None = None
    script: str | None = None
    confirm: bool = False
    retries: int = 2
    verify: str | None = None  # 'load' or a Touchstone path
    verify_tolerance: float | None = None
    resume: bool = False
    compare_last: bool = True
    ascii_only: bool | None = None


def calibrate(plan: Plan, options: Options = Options(), *, stdin: TextIO | None = None,
              stdout: TextIO | None = None) -> Outcome:
    """Run the guided calibration of ``plan``; one-line ``SweepdError`` on any problem."""
    from acquire.capture.calchoice import cal_dir_for
    from acquire.capture.session import Session

    spec = plan.calibration
    if spec is None:
        raise CalError(f"plan {plan.source}: no calibration section (or method: none): "
                       "nothing to calibrate")
    prompt = _prompt(options, spec.prompt)
    switch_command = options.switch_command or spec.switch_command
    if prompt == "command" and not switch_command:
        raise CalError(f"plan {plan.source}: --prompt command needs calibration.switch.command "
                       "in the plan or --switch-command")
    actions = parse_script(options.script) if options.script else ()
    kit = load_kit(spec.kit)
    session = Session(plan, options.resource)  # loads the dialect; opened below
    steps = build_steps(spec.method, kit, plan.ports, str(plan.source), spec.isolation,
                        session.dialect)
    kit.check_range(plan.stimulus.frequencies())
    verify = _verify_spec(options, spec.method, steps)
    cal_dir = cal_dir_for(plan)
    _writable(cal_dir)
    console = Console(stdout, ascii_only=options.ascii_only)
    with session:
        connector = _connector(prompt, switch_command, session, spec.switch_names)
        backend = _backend(prompt, options, console, stdin, actions)
        fingerprint = Fingerprint(plan.name, spec.method, session.identity_text,
                                  session.applied, kit.name, kit.sha256)
        pfile = partial_path(cal_dir, plan.name)
        partial = _partial(pfile, fingerprint, options.resume, spec.max_age_s,
                           {s.name: s.reads for s in steps}, session.applied.points, console)
        previous = (_previous(cal_dir, plan.name, session.identity_text, spec.method)
                    if options.compare_last else None)
        setup = Setup(plan, session, kit, steps, connector, backend, console, cal_dir, partial,
                      pfile, previous, verify)
        return Procedure(setup).run()


def _prompt(options: Options, planned: str) -> str:
    if options.script is not None and options.prompt not in (None, "scripted"):
        raise CalError(f"--script goes with --prompt scripted, not --prompt {options.prompt}")
    prompt = "scripted" if options.script is not None else (options.prompt or planned)
    if prompt not in PROMPTS:
        raise CalError(f"--prompt: {prompt!r} is not one of {', '.join(PROMPTS)}")
    return prompt


def _connector(prompt: str, switch_command: str | None, session: object,
               names: dict[str, str] | None = None) -> Connector:
    if prompt == "terminal":
        return ManualConnector()
    if prompt == "command" or (prompt == "scripted" and switch_command):
        assert switch_command is not None
        return CommandConnector(switch_command, names=names)
    return SwitchConnector(session)


def _backend(prompt: str, options: Options, console: Console, stdin: TextIO | None,
             actions: tuple) -> Backend:
    if options.retries < 0:
        raise CalError(f"--retries must be 0 or more, got {options.retries}")
    if prompt == "scripted":
        return ScriptedBackend(console, actions, options.retries)
    if prompt == "terminal" or options.confirm:
        return TerminalBackend(console, stdin or sys.stdin)
    return AutoBackend(console, options.retries)


def _verify_spec(options: Options, method_name: str, steps: tuple) -> VerifySpec | None:
    if options.verify is None:
        if options.verify_tolerance is not None:
            raise CalError("--verify-tolerance needs --verify load or --verify FILE")
        return None
    tol = options.verify_tolerance
    if tol is not None and not 0 < tol <= 2:
        raise CalError(f"--verify-tolerance: must be a |Γ| difference above 0 and at most 2, "
                       f"got {tol:g}")
    target = options.verify
    if target.lower() == "load":
        if not any(s.kind == "load" for s in steps):
            raise CalError(f"--verify load: method {method_name} measures no load; give a "
                           "verification device's Touchstone file instead")
        return VerifySpec("load", tol)
    if not any(s.is_reflect for s in steps):
        raise CalError(f"--verify: method {method_name} corrects no reflection to verify")
    if not Path(target).is_file():
        raise CalError(f"--verify {target}: no such Touchstone file (or give 'load')")
    if tol is None and not method(method_name).full_reflection:
        raise CalError(f"--verify {target}: give --verify-tolerance; method {method_name} "
                       "leaves directivity or source match uncorrected, so no residual estimate")
    return VerifySpec(target, tol)


def _writable(cal_dir: Path) -> None:
    try:
        cal_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise StorageError(f"cal folder {cal_dir}: cannot create it ({exc.strerror})") from None
    if not os.access(cal_dir, os.W_OK | os.X_OK):
        raise StorageError(f"cal folder {cal_dir}: not writable")


def _partial(pfile: Path, fingerprint: Fingerprint, resume: bool, max_age_s: float | None,
             params: dict, points: int, console: Console) -> Partial:
    if not pfile.exists():
        if resume:
            console.say(f"note: no unfinished calibration in {pfile.parent}; starting afresh")
        return Partial(fingerprint)
    if not resume:
        console.say(f"note: an unfinished calibration is kept in {pfile}; this run starts over "
                    "and replaces it (--resume continues it instead)")
        return Partial(fingerprint)
    old = load_partial(pfile)
    why = old.mismatch(fingerprint, max_age_s) or readings_fit(old, params, points)
    if why:
        raise CalError(f"cannot resume {pfile}: {why}; run without --resume to start over")
    old.fingerprint = fingerprint
    return old


def _previous(cal_dir: Path, plan: str, instrument: str, method_name: str) -> CalSet | None:
    """The newest readable cal set of this plan and instrument made with a full one-port
    or the same method (normalisation-only terms would blur the comparison)."""
    wanted = method(method_name)
    for path, header in list_calsets(cal_dir, plan, instrument):
        name = canonical_name(str(header.get("method")))
        if name != wanted.name and (name not in METHODS or not METHODS[name].full_reflection
                                    or METHODS[name].two_port != wanted.two_port):
            continue
        try:
            return CalSet.load(path)
        except CalError:
            continue
    return None
