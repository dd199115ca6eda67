"""Plain line output for the guided procedure (works over ssh and through a pipe).

No full-screen library, no colours: every message is a line, flushed at once, so a
technician on a slow link or a program reading the pipe sees it immediately.
"""

from __future__ import annotations

import sys
from typing import TextIO

from acquire.guided.progress import unicode_ok

CAUTIONS = (
    "Cautions:",
    "  - Never connect the test port to a line that carries, or may carry, transmitter "
    "power or DC.",
    "  - ESD: ground yourself (wrist strap) and discharge cables before connecting them.",
    "  - Tower work and RF exposure: follow local codes and licensed practice.",
)


class Console:
    """Where the procedure writes; knows whether the stream takes Unicode marks."""

    def __init__(self, out: TextIO | None = None, *, ascii_only: bool | None = None) -> None:
        self.out = out or sys.stdout
        if ascii_only is None:
            ascii_only = not unicode_ok(getattr(self.out, "encoding", None))
        self.ascii_only = ascii_only

    def say(self, *lines: str) -> None:
        for line in lines:
            self.out.write(self._plain(line) + "\n")
        self.out.flush()

    def prompt(self, text: str = "> ") -> None:
        self.out.write(self._plain(text))
        self.out.flush()

    def mark(self, ok: bool) -> str:
        if self.ascii_only:
            return "ok" if ok else "!!"
        return "✓" if ok else "✗"

    def _plain(self, text: str) -> str:
        if not self.ascii_only:
            return text
        for fancy, plain in (("−", "-"), ("±", "+/-"), ("°", " deg"), ("≤", "<="),
                             ("Γ", "G"), ("Δ", "d"), ("…", "..."), ("—", "-"), ("→", "->")):
            text = text.replace(fancy, plain)
        return text.encode("ascii", "replace").decode("ascii")
