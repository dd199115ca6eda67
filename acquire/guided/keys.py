"""What a technician (or a script standing in for one) can answer at a prompt.

Terminal keys are single letters typed before Enter; an empty line is Enter:

    Enter  measure (or, at the last prompt, save)     b  back one step
    r      measure the last measured step again now   1-9  go to that step
    s      skip the verification                      i  stop comparing with the last cal
    a      abort (nothing is saved as a cal set)      ?  help

A script (``--script``) is a comma- or space-separated list of the same keys plus
standard names: ``short`` means "connect the short, then press Enter", ``keep`` means
"press Enter without changing anything", ``enter`` is Enter.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from acquire.errors import CalError
from drivers.dialect import STANDARDS

PROCEED, BACK, REDO, GOTO, SKIP, IGNORE_LAST, ABORT, HELP = (
    "proceed", "back", "redo", "goto", "skip", "ignore-last", "abort", "help")
KEEP = ""  # Action.connect value: measure without connecting anything
_LETTERS = {"": PROCEED, "b": BACK, "r": REDO, "s": SKIP, "i": IGNORE_LAST, "a": ABORT,
            "q": ABORT, "?": HELP, "h": HELP}
_WORDS = {"enter": PROCEED, "back": BACK, "redo": REDO, "skip": SKIP, "abort": ABORT,
          "help": HELP}

HELP_TEXT = (
    "Keys (type the letter, then Enter):",
    "  Enter  measure the standard now connected (at the last prompt: save the cal set)",
    "  b      back to the previous step (its reading is kept until measured again)",
    "  r      measure the last measured step again now (e.g. after tightening its connector)",
    "  1-9    go to that step",
    "  s      skip the verification (at the verification prompt)",
    "  i      stop comparing with the last calibration (the setup was changed on purpose)",
    "  a      abort: no cal set is saved; measured steps are kept for --resume",
    "  ?      this help",
)


@dataclass(frozen=True)
class Action:
    """One answer. ``connect``: the fixture position a scripted technician sets first
    (None: the step's own standard; ``KEEP``: change nothing)."""

    kind: str
    step: int = 0  # GOTO: 1-based step number
    connect: str | None = None
    reason: str = ""  # ABORT: why, when not the technician's own choice


def parse_key(text: str) -> Action | None:
    """A terminal answer, or None when it is not a known key."""
    word = text.strip().lower()
    if word in _LETTERS:
        return Action(_LETTERS[word])
    if word in _WORDS:
        return Action(_WORDS[word])
    if word.isdigit() and 0 < int(word) < 100:
        return Action(GOTO, step=int(word))
    return None


def parse_script(text: str) -> tuple[Action, ...]:
    """A scripted technician; ``CalError`` naming the first item that is not allowed."""
    items = [w for w in re.split(r"[,\s]+", text.strip()) if w]
    actions = []
    for index, item in enumerate(items, 1):
        word = item.lower()
        if word == "dut":
            word = "device"
        if word in STANDARDS:
            actions.append(Action(PROCEED, connect=word))
        elif word == "keep":
            actions.append(Action(PROCEED, connect=KEEP))
        elif word != "" and (action := parse_key(word)) is not None:
            actions.append(action)
        else:
            raise CalError(f"--script: item {index} {item!r} is not a standard "
                           f"({', '.join(STANDARDS)}), 'keep', 'enter' or a key "
                           "(b, r, s, i, a, a step number)")
    return tuple(actions)
