"""The operator's terminal: plain lines out, whole lines in (scanner or keyboard).

Works on a real terminal, over ssh and through pipes: every prompt is written and
flushed before reading, input is read as bytes and decoded as UTF-8 with undecodable
bytes kept visible (``surrogateescape``) so the serial check can name them. A line
longer than ``MAX_LINE`` bytes is read to its end and returned whole-but-cut (the serial
check then refuses it as too long). End of input reads as ``None`` (the shift ends).
Colour is used only on a terminal, never when ``NO_COLOR`` is set or ``TERM=dumb``.
"""

from __future__ import annotations

import os
import sys
from typing import BinaryIO, TextIO

MAX_LINE = 4096
COLORS = {"green": "32", "red": "31", "yellow": "33", "bold": "1"}


def color_wanted(out: TextIO) -> bool:
    if os.environ.get("NO_COLOR") or os.environ.get("TERM", "") in ("", "dumb"):
        return False
    isatty = getattr(out, "isatty", None)
    return bool(isatty and isatty())


class Terminal:
    """Line input and output for the station (see the module docstring)."""

    def __init__(self, stdin: BinaryIO | None = None, out: TextIO | None = None, *,
                 color: bool | None = None) -> None:
        self.inp = stdin if stdin is not None else sys.stdin.buffer
        self.out = out if out is not None else sys.stdout
        self.color = color_wanted(self.out) if color is None else color

    def say(self, *lines: str) -> None:
        for line in lines:
            self.out.write(line + "\n")
        self.out.flush()

    def paint(self, text: str, color: str) -> str:
        if not self.color:
            return text
        codes = ";".join(COLORS[c] for c in color.split("+"))
        return f"\x1b[{codes}m{text}\x1b[0m"

    def ask(self, prompt: str) -> str | None:
        """Show ``prompt`` and read one line (without its line end); None at end of input."""
        self.out.write(prompt)
        self.out.flush()
        raw = self._read()
        if raw is None:
            self.out.write("\n")
            self.out.flush()
            return None
        return raw.rstrip(b"\r\n").decode("utf-8", "surrogateescape")

    def readline(self) -> str:
        """File-like reading for the guided calibration's prompts ("" at end of input)."""
        raw = self._read()
        return "" if raw is None else raw.decode("utf-8", "replace")

    def _read(self) -> bytes | None:
        raw = self.inp.readline(MAX_LINE + 1)
        if not raw:
            return None
        if len(raw) > MAX_LINE and not raw.endswith(b"\n"):
            rest = raw
            while rest and not rest.endswith(b"\n"):  # drain the over-long line
                rest = self.inp.readline(MAX_LINE)
        return raw
