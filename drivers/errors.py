"""Exception tree shared by every layer of sweepd.

The root lives here, in the lowest layer, so that drivers, acquire and the CLI can all
raise and catch one family. Every message is a single line that names the file, field,
command or byte at fault; the CLI prints it as ``sweepd: error: <message>`` and exits 2.
Exceptions stay picklable (plain ``args``) so worker processes can report them.
"""

from __future__ import annotations


class SweepdError(Exception):
    """Root of every error sweepd reports to a user (never a raw traceback)."""


class DialectError(SweepdError):
    """A dialect file is missing, malformed or inconsistent."""


class InstrumentError(SweepdError):
    """Anything that went wrong talking to an instrument."""


class ConnectError(InstrumentError, OSError):
    """The resource could not be opened (refused, no such port, busy)."""


class InstrumentTimeout(InstrumentError, TimeoutError):
    """No complete reply arrived within the deadline."""


class ConnectionLost(InstrumentError, ConnectionError):
    """The link dropped while a command or reply was in flight."""


class ReplyError(InstrumentError):
    """A reply arrived but is not what the command promises (garbage, wrong count)."""


class BlockError(ReplyError):
    """An IEEE 488.2 arbitrary block is malformed, truncated or of the wrong length."""


class SettingMismatch(InstrumentError):
    """A setting read back differs from what was sent."""


class ScpiErrorQueue(InstrumentError):
    """The instrument's error queue held entries after an operation.

    ``entries`` is a tuple of ``(code, text)`` pairs, oldest first.
    """

    def __init__(self, message: str, entries: tuple[tuple[int, str], ...] = ()) -> None:
        super().__init__(message, entries)
        self.entries = tuple(entries)

    def __str__(self) -> str:
        return str(self.args[0])


class StimulusError(SweepdError, ValueError):
    """A stimulus value cannot be sent as given (not a finite number, not a whole number)."""
