"""The progress line: where the technician is, what is done, what must be repeated.

    [2/3] SHORT  ✓open  ·short  ·load        (Unicode)
    [2/3] SHORT  +open  .short  .load        (plain ASCII)

Marks: done, not yet measured, to repeat (a check named it).
"""

from __future__ import annotations

from collections.abc import Sequence

DONE, PENDING, REPEAT = "done", "pending", "repeat"
MARKS = {
    False: {DONE: "✓", PENDING: "·", REPEAT: "✗"},
    True: {DONE: "+", PENDING: ".", REPEAT: "x"},
}


def can_encode(text: str, encoding: str | None) -> bool:
    """Whether a stream with ``encoding`` can print ``text`` (None: a text buffer, any)."""
    if encoding is None:
        return True
    try:
        text.encode(encoding)
    except (UnicodeEncodeError, LookupError):
        return False
    return True


def unicode_ok(encoding: str | None) -> bool:
    return can_encode("".join(MARKS[False].values()), encoding)


def progress_line(position: int, title: str, items: Sequence[tuple[str, str]], *,
                  ascii_only: bool = False) -> str:
    """``[position/total] TITLE  <mark><name> ...``; ``position`` 0 means finished."""
    marks = MARKS[ascii_only]
    total = len(items)
    head = f"[{position}/{total}]" if position else "[done]"
    body = "  ".join(f"{marks[state]}{name}" for name, state in items)
    return f"{head} {title}  {body}".rstrip()
