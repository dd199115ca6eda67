"""How a standard reaches the reference plane: by hand, by an external command, or by
the analyzer's own standard switch.

The external command comes from the plan (``calibration.switch.command``), is split once
with ``shlex`` and run without a shell; ``{standard}`` is replaced by one of the fixed
fixture names (open, short, load, thru, device), or by the site's own name for it from
``calibration.switch.names`` (a fixture tool may call the device ``dut``), and nothing
else; an optional ``{port}`` by the port the standard goes to: ``1``, ``2`` or ``both``
(a thru, loads for isolation, a two-port device). Site names are checked words, so each
stays one argument. A non-zero exit status,
a missing program or a hang is a ``FixtureError`` (one line) and the step can be retried.
"""

from __future__ import annotations

import shlex
import subprocess
from collections.abc import Mapping
from typing import Any, Protocol

from acquire.errors import CalError
from acquire.plan import site_name_problem
from drivers.dialect import STANDARDS

COMMAND_TIMEOUT_S = 60.0
PLACEHOLDER = "{standard}"
PORT_PLACEHOLDER = "{port}"


def check_site_names(names: Mapping[str, str]) -> dict[str, str]:
    """Our standard names -> the fixture tool's; ``CalError`` names the first bad entry."""
    checked = {}
    for ours, theirs in names.items():
        if ours not in STANDARDS:
            raise CalError(f"switch names: {ours!r} is not one of {', '.join(STANDARDS)}")
        problem = site_name_problem(theirs)
        if problem:
            raise CalError(f"switch names: {ours}: {problem}")
        checked[ours] = theirs
    return checked


class FixtureError(CalError):
    """A standard could not be connected (switch command failed, switch refused)."""


class Connector(Protocol):
    manual: bool  # True: the technician connects standards by hand
    description: str

    def connect(self, standard: str, port: int = 0) -> None: ...


class ManualConnector:
    """The technician connects each standard; nothing to do here."""

    manual = True
    description = "by hand"

    def connect(self, standard: str, port: int = 0) -> None:
        _check_name(standard)


class CommandConnector:
    """Runs ``template`` with ``{standard}`` filled in, e.g. ``fixturectl connect {standard}``."""

    manual = False

    def __init__(self, template: str, *, timeout_s: float = COMMAND_TIMEOUT_S,
                 names: Mapping[str, str] | None = None) -> None:
        try:
            self.argv = shlex.split(template)
        except ValueError as exc:
            raise CalError(f"switch command {template!r}: cannot split it ({exc})") from None
        if not self.argv:
            raise CalError("switch command is empty")
        if not any(PLACEHOLDER in arg for arg in self.argv):
            raise CalError(f"switch command {template!r} must contain {PLACEHOLDER}")
        self.template = template
        self.timeout_s = timeout_s
        self.names = check_site_names(names or {})
        self.description = f"by the switch command '{template}'"
        if self.names:
            shown = ", ".join(f"{ours} as {theirs}" for ours, theirs in self.names.items())
            self.description += f" ({shown})"

    def command(self, standard: str, port: int = 0) -> list[str]:
        _check_name(standard)
        name = self.names.get(standard, standard)
        where = str(port) if port in (1, 2) else "both"
        return [arg.replace(PLACEHOLDER, name).replace(PORT_PLACEHOLDER, where)
                for arg in self.argv]

    def connect(self, standard: str, port: int = 0) -> None:
        argv = self.command(standard, port)
        shown = shlex.join(argv)
        try:
            done = subprocess.run(argv, capture_output=True, text=True, errors="replace",
                                  timeout=self.timeout_s, check=False, stdin=subprocess.DEVNULL)
        except FileNotFoundError:
            raise FixtureError(f"switch command '{shown}': program {argv[0]!r} not found") from None
        except PermissionError:
            raise FixtureError(f"switch command '{shown}': {argv[0]!r} is not executable") from None
        except subprocess.TimeoutExpired:
            raise FixtureError(f"switch command '{shown}' did not finish within "
                               f"{self.timeout_s:g} s") from None
        except OSError as exc:
            raise FixtureError(f"switch command '{shown}': cannot run it "
                               f"({exc.strerror})") from None
        if done.returncode != 0:
            said = _last_line(done.stderr) or _last_line(done.stdout)
            raise FixtureError(f"switch command '{shown}' failed with exit status "
                               f"{done.returncode}" + (f": {said}" if said else ""))


class SwitchConnector:
    """The analyzer's automatic standard switch, through its dialect."""

    manual = False

    def __init__(self, session: Any) -> None:
        self.session = session  # acquire.capture.session.Session (open)
        if session.switch_name is None:
            raise CalError(f"dialect {session.dialect.name} has no standard switch (no "
                           "'switch' section): use --prompt terminal or a switch command")
        self.description = f"by the analyzer's standard switch ({session.switch_name})"

    def connect(self, standard: str, port: int = 0) -> None:
        from drivers.errors import DialectError, ScpiErrorQueue, SettingMismatch

        _check_name(standard)
        try:
            self.session.select_standard(standard)
        except (DialectError, SettingMismatch, ScpiErrorQueue) as exc:
            raise FixtureError(f"standard switch: {exc}") from None


def _check_name(standard: str) -> None:
    if standard not in STANDARDS:  # never pass anything else to a command or instrument
        raise CalError(f"not a fixture position: {standard!r} (known: {', '.join(STANDARDS)})")


def _last_line(text: str) -> str:
    lines = [ln.strip() for ln in (text or "").splitlines() if ln.strip()]
    return lines[-1][:200] if lines else ""
