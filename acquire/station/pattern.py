"""Serial-number patterns in a linear-time engine (RE2), so no scan can hang a station.

A backtracking engine takes exponential time on patterns such as ``(a+)+b`` against
63 a's and a c. RE2 matches in time linear in the input and refuses, at compile time,
what it cannot run in linear time (back-references, look-arounds) and programs beyond
a memory budget; such a pattern is rejected when the plan is read, in one line.
"""

from __future__ import annotations

from typing import Any

MAX_PATTERN_LENGTH = 256
MAX_PROGRAM_BYTES = 1 << 20  # RE2's memory budget for one compiled pattern


class PatternError(ValueError):
    """A serial pattern cannot be used; the message says why, on one line."""


def compile_pattern(pattern: str) -> Any:
    """``pattern`` compiled with RE2 (``fullmatch`` like ``re``), or ``PatternError``."""
    import re2

    if len(pattern) > MAX_PATTERN_LENGTH:
        raise PatternError(f"is {len(pattern)} characters long, at most {MAX_PATTERN_LENGTH}")
    options = re2.Options()
    options.log_errors = False  # RE2 would print its own line on stderr
    options.max_mem = MAX_PROGRAM_BYTES
    try:
        return re2.compile(pattern, options)
    except re2.error as exc:
        raise PatternError(f"not a valid regular expression for linear-time matching "
                           f"(RE2 syntax: no back-references or look-arounds): "
                           f"{_reason(exc)}") from None


def _reason(exc: Exception) -> str:
    reason = exc.args[0] if exc.args else str(exc)
    if isinstance(reason, bytes):
        reason = reason.decode("utf-8", "replace")
    text = " ".join(str(reason).split())
    return text if len(text) <= 120 else text[:117] + "..."
