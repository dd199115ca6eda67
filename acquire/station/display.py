"""What the operator sees: the verdict in letters readable at arm's length, then the
serial, the worst margin, the key figures, the files and the shift's counters.

Plain ASCII (any terminal, ssh, a log file); colour only where the terminal takes it.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

from acquire.station.counters import Yield

# 5 x 5 block letters, our own drawing; '#' is drawn twice as wide to look square.
FONT = {
    "A": (" ### ", "#   #", "#####", "#   #", "#   #"),
    "E": ("#####", "#    ", "#### ", "#    ", "#####"),
    "D": ("#### ", "#   #", "#   #", "#   #", "#### "),
    "F": ("#####", "#    ", "#### ", "#    ", "#    "),
    "H": ("#   #", "#   #", "#####", "#   #", "#   #"),
    "I": ("#####", "  #  ", "  #  ", "  #  ", "#####"),
    "K": ("#   #", "#  # ", "###  ", "#  # ", "#   #"),
    "L": ("#    ", "#    ", "#    ", "#    ", "#####"),
    "O": (" ### ", "#   #", "#   #", "#   #", " ### "),
    "P": ("#### ", "#   #", "#### ", "#    ", "#    "),
    "R": ("#### ", "#   #", "#### ", "#  # ", "#   #"),
    "S": (" ####", "#    ", " ### ", "    #", "#### "),
    "T": ("#####", "  #  ", "  #  ", "  #  ", "  #  "),
    " ": ("     ",) * 5,
}
WORDS = {"pass": ("PASS", "green+bold"), "fail": ("FAIL", "red+bold"),
         "error": ("ERROR", "yellow+bold"), "stop": ("STOP", "red+bold"),
         "ok": ("OK", "green+bold"), "retest": ("RETEST", "yellow+bold"),
         "hold": ("HOLD", "yellow+bold")}
RULE = "=" * 64


def big(word: str) -> list[str]:
    """``word`` (letters of FONT) in 5 rows of block letters."""
    rows = []
    for r in range(5):
        glyphs = ("".join(c * 2 for c in FONT[ch][r]) for ch in word.upper())
        rows.append("  ".join(glyphs).rstrip())
    return rows


def banner(key: str, paint: Callable[[str, str], str] | None = None) -> list[str]:
    """The big word for a verdict key (pass, fail, error, stop, ok), framed; ``paint``
    colours each line (``Terminal.paint``)."""
    word, color = WORDS[key]
    lines = [RULE, *("    " + row for row in big(word)), RULE]
    if paint is not None:
        lines = [paint(line, color) for line in lines]
    return lines


def unit_lines(serial: str, verdict: str, attempt: int, margin: float | None, where: str,
               figures_line: str, failing: Sequence[str], files: Sequence[str],
               counters: Yield, why: str | None = None) -> list[str]:
    """The text under the banner for one unit; ``why`` (the worst violation in words)
    right under the verdict of a unit that did not pass."""
    retest = f"   RETEST (attempt {attempt})" if attempt > 1 else ""
    lines = [f"  {serial}: {verdict.upper()}{retest}"]
    if why:
        lines.append(f"  WHY: {why}")
    if margin is not None:
        lines.append(f"  worst margin {margin:+.4g}  ({where})")
    lines.append(f"  {figures_line}")
    lines.extend(f"  not passing: {text}" for text in failing)
    lines.extend(f"  file {path}" for path in files)
    lines.append(f"  {counters.line()}")
    return lines
