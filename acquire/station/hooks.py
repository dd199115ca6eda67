"""Line hooks: commands the station runs on pass, fail, line stopped and line resumed
(a stack light, a buzzer, a label printer).

::

    station:
      hooks:
        pass: [/opt/line/stacklight, green, "{serial}"]
        fail: [/opt/line/stacklight, red, "{serial}", "{verdict}", "{touchstone}", "{plot}"]
        line_stopped: [/opt/line/buzzer, "on", "{reason}"]
        line_resumed: [/opt/line/buzzer, "off"]
        timeout: 5 s                  # each run is ended after this long (default 10 s)

Each command is a list: the program (a path, relative to the plan's folder, or a name
found on PATH), then its arguments. ``{serial}``, ``{verdict}``, ``{touchstone}``,
``{summary}``, ``{plot}``, ``{plan}``, ``{station}`` and ``{reason}`` are replaced by
their values as whole text, never read by a shell (no quoting, no globbing, no pipes).
A program must be owned by the station's user (or root) and writable by nobody else. A
hook that fails (cannot start, exits non-zero, runs past its timeout) is journalled as a
fault and shown in one line; measuring goes on.
"""

from __future__ import annotations

import logging
import os
import shutil
import stat
import string
import subprocess
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from acquire.yamlfile import Node

log = logging.getLogger(__name__)

EVENTS = ("pass", "fail", "line_stopped", "line_resumed")
FIELDS = ("serial", "verdict", "touchstone", "summary", "plot", "plan", "station", "reason")
DEFAULT_TIMEOUT_S = 10.0
MAX_TIMEOUT_S = 120.0
MAX_ARGS = 64
_TAIL = 160  # characters of a failing hook's error output kept in its message


@dataclass(frozen=True)
class Hooks:
    """The validated ``station.hooks`` section: event -> argument templates."""

    commands: dict[str, tuple[str, ...]] = field(default_factory=dict)
    timeout_s: float = DEFAULT_TIMEOUT_S


def parse_hooks(node: Node) -> Hooks:
    """Read ``station.hooks``; errors name the key and what is allowed."""
    if not node.present:
        return Hooks()
    node.mapping((*EVENTS, "timeout"))
    commands = {}
    for event in EVENTS:
        if node[event].present:
            commands[event] = _command(node[event])
    timeout = node["timeout"].quantity("time", DEFAULT_TIMEOUT_S, lo=0.1, hi=MAX_TIMEOUT_S)
    return Hooks(commands, timeout)


def _command(node: Node) -> tuple[str, ...]:
    items = node.elements(min_len=1)
    if len(items) > MAX_ARGS:
        node.fail(f"holds {len(items)} arguments; at most {MAX_ARGS}")
    args = []
    for item in items:
        if not isinstance(item.value, (str, int, float)) or isinstance(item.value, bool):
            item.fail("must be text (a program or an argument)")
        text = str(item.value)
        if "\x00" in text or "\n" in text:
            item.fail("must be one line of text without NUL bytes")
        _check_fields(item, text)
        args.append(text)
    program = args[0]
    if "{" in program:
        items[0].fail("the program must be a fixed path or name, not a {field}")
    args[0] = _program(items[0], program)
    return tuple(args)


def _check_fields(node: Node, text: str) -> None:
    try:
        parts = list(string.Formatter().parse(text))
    except ValueError as exc:
        node.fail(f"bad braces in {text!r}: {exc}; write {{{{ and }}}} for literal braces")
    for _, name, spec, conversion in parts:
        if name is None:
            continue
        if name not in FIELDS or spec or conversion:
            node.fail(f"unknown field {{{name}}}; allowed: "
                      f"{', '.join('{' + f + '}' for f in FIELDS)}")


def _program(node: Node, program: str) -> str:
    """The program as an absolute path (checked now, so a typo shows at the start)."""
    if os.sep in program or program.startswith("."):
        path = node.file_path()
        if not (path.is_file() and os.access(path, os.X_OK)):
            node.fail(f"program not found or not executable: {path}")
    else:
        found = shutil.which(program)
        if found is None:
            node.fail(f"program {program!r} not found on PATH")
        path = Path(found)
    _trusted(node, path)
    return str(path)


def _trusted(node: Node, path: Path) -> None:
    """A program the station runs must be owned by its user (or root) and writable by
    nobody else: otherwise another user could make the station run anything."""
    for probe in {path, path.resolve()}:
        info = probe.stat()
        if info.st_uid not in (os.geteuid(), 0):
            node.fail(f"program {probe} is owned by uid {info.st_uid}, not by the user "
                      "running the station (or root); refusing to run it")
        if info.st_mode & (stat.S_IWGRP | stat.S_IWOTH):
            node.fail(f"program {probe} is writable by group or others (mode "
                      f"{stat.S_IMODE(info.st_mode):04o}); refusing to run it (chmod go-w)")


@dataclass(frozen=True)
class HookRun:
    """What one hook run did."""

    event: str
    argv: tuple[str, ...]
    ok: bool
    message: str


def run_hook(hooks: Hooks, event: str, values: dict[str, Any]) -> HookRun | None:
    """Run the command of ``event`` with ``values`` filled in (no shell); None when the
    event has no hook. Never raises for a failing hook: the outcome says what happened."""
    template = hooks.commands.get(event)
    if template is None:
        return None
    text = {name: "" if values.get(name) is None else str(values[name]) for name in FIELDS}
    argv = (template[0], *(arg.format_map(text) for arg in template[1:]))
    name = Path(argv[0]).name
    try:
        done = subprocess.run(argv, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                              stderr=subprocess.PIPE, timeout=hooks.timeout_s, shell=False,
                              check=False, env={**os.environ, "SWEEPD_EVENT": event})
    except subprocess.TimeoutExpired:
        return HookRun(event, argv, False,
                       f"hook {event} ({name}) still running after {hooks.timeout_s:g} s; "
                       "ended")
    except OSError as exc:
        return HookRun(event, argv, False,
                       f"hook {event} ({name}) could not start: {exc.strerror or exc}")
    if done.returncode != 0:
        tail = done.stderr.decode("utf-8", "replace").strip().replace("\n", " | ")[-_TAIL:]
        said = f": {tail}" if tail else ""
        return HookRun(event, argv, False,
                       f"hook {event} ({name}) exited with status {done.returncode}{said}")
    return HookRun(event, argv, True, f"hook {event} ({name}) done")


class LineHooks:
    """Fires the hooks of a shift; failures are journalled (``fault``) and shown (``say``),
    and never stop measuring. Remembers whether the line is stopped, so the stop and the
    resume each fire once."""

    def __init__(self, hooks: Hooks, common: dict[str, Any],
                 say: Callable[..., None]) -> None:
        self.hooks = hooks
        self.common = dict(common)
        self.say = say
        self.fault: Callable[[str], None] = lambda _message: None
        self.stopped = False

    def unit(self, **values: Any) -> None:
        """A unit's verdict: pass fires ``pass``; fail and error fire ``fail``; a unit
        neither passed nor failed (indeterminate, on hold) fires nothing."""
        event = {"pass": "pass", "fail": "fail", "error": "fail"}.get(values.get("verdict"))
        if event is not None:
            self._fire(event, values)

    def line_stopped(self, reason: str) -> None:
        if not self.stopped:
            self.stopped = True
            self._fire("line_stopped", {"reason": reason})

    def line_ready(self) -> None:
        """The line measures again (after a stop): fires line_resumed once."""
        if self.stopped:
            self.stopped = False
            self._fire("line_resumed", {})

    def _fire(self, event: str, values: dict[str, Any]) -> None:
        outcome = run_hook(self.hooks, event, {**self.common, **values})
        if outcome is None:
            return
        if outcome.ok:
            log.info("%s: %s", outcome.message, outcome.argv)
            return
        log.warning("%s: %s", outcome.message, outcome.argv)
        self.fault(outcome.message)
        self.say(f"  note: {outcome.message}; measuring goes on")
