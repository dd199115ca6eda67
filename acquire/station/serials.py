"""Checking a scanned or typed serial before anything is measured or named after it.

A barcode scanner types the code and Enter; blanks and CR around it are dropped. Then,
whatever the plan's pattern says, a serial is refused when it is empty, too long, holds
a control character or a byte that is not UTF-8 text, a path separator or ``..``; and
it must match the plan's pattern in full. File names are built from the serial with
``acquire.storage.safe_component`` as well, so even an allowed serial cannot leave the
output folder. Messages show the serial escaped (``'PA\\x1b0001'``), never raw, so a
stray escape sequence cannot upset the operator's terminal.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from acquire.station.errors import SerialRefused
from acquire.station.pattern import compile_pattern

DEFAULT_PATTERN = r"[A-Za-z0-9][A-Za-z0-9._+-]*"
DEFAULT_MAX_LENGTH = 40
MAX_LENGTH_LIMIT = 128
SCANNER_BLANKS = " \t\r\n"
SHOWN_MAX = 40


@dataclass(frozen=True)
class SerialRule:
    """What a scanned serial must look like."""

    pattern: str = DEFAULT_PATTERN
    max_length: int = DEFAULT_MAX_LENGTH

    @property
    def regex(self) -> Any:
        """The pattern compiled with RE2 (linear-time matching; see station/pattern.py)."""
        return compile_pattern(self.pattern)


def shown(text: str) -> str:
    """``text`` quoted and escaped for a message (control bytes visible), shortened."""
    quoted = ascii(text[:SHOWN_MAX])
    return quoted + ("..." if len(text) > SHOWN_MAX else "")


def unsafe_reason(text: str, max_length: int) -> str | None:
    """Why ``text`` can never be a serial (whatever the pattern), or None."""
    if not text:
        return "is empty: scan or type the serial, then Enter"
    if len(text) > max_length:
        return f"is too long: {len(text)} characters, at most {max_length}"
    for position, char in enumerate(text, 1):
        if "\udc80" <= char <= "\udcff":
            return (f"holds byte 0x{ord(char) - 0xDC00:02x} at position {position}, "
                    "which is not UTF-8 text")
        if not char.isprintable():
            return (f"holds control character 0x{ord(char):02x} at position {position} "
                    "(check the scanner's suffix settings)")
    for sep in ("/", "\\"):
        if sep in text:
            return f"holds a path separator {sep!r}"
    if ".." in text:
        return "holds '..'"
    return None


def check_serial(raw: str, rule: SerialRule) -> str:
    """The serial in ``raw`` (blanks around it dropped), or ``SerialRefused`` saying why."""
    text = raw.strip(SCANNER_BLANKS)
    why = unsafe_reason(text, rule.max_length)
    if why is None and not rule.regex.fullmatch(text):
        why = f"does not match the pattern {rule.pattern}"
    if why is not None:
        raise SerialRefused(f"serial {shown(text)} {why}")
    return text
