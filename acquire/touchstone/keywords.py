"""The keyword block of a version 2 file, from ``[Version]`` to ``[Network Data]``.

Rules from the Touchstone File Format Specification 2.0 (IBIS Open Forum, 2009) and
2.1: ``[Version]`` first, then the option line and ``[Number of Ports]``, then in any
order ``[Two-Port Data Order]``, ``[Number of Frequencies]``, ``[Number of Noise
Frequencies]``, ``[Reference]`` (its values may continue on the following lines),
``[Matrix Format]``, ``[Mixed-Mode Order]`` and an information block the reader skips.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

from drivers.yamlnode import show

from .header import split_keyword
from .limits import MAX_FREQUENCIES, MAX_PORTS
from .numparse import is_number

NAMES = {
    "version": "[Version]", "number of ports": "[Number of Ports]",
    "two-port data order": "[Two-Port Data Order]",
    "number of frequencies": "[Number of Frequencies]",
    "number of noise frequencies": "[Number of Noise Frequencies]",
    "reference": "[Reference]", "matrix format": "[Matrix Format]",
    "mixed-mode order": "[Mixed-Mode Order]", "begin information": "[Begin Information]",
    "end information": "[End Information]", "network data": "[Network Data]",
    "noise data": "[Noise Data]", "end": "[End]",
}
_MIXED = re.compile(r"[DC]\d+,\d+\Z|S\d+\Z")


def display(key: str) -> str:
    """The specification's spelling of a keyword, e.g. ``[Number of Ports]``."""
    return NAMES.get(key, f"[{key}]")


class HeaderError(ValueError):
    """A defect in the keyword block; ``line`` is 1-based (0: no particular line)."""

    def __init__(self, line: int, message: str) -> None:
        super().__init__(message)
        self.line = line
        self.message = message


@dataclass
class Keywords:
    """Keyword values, the lines they were on, option lines and lenient-mode notes."""

    version: str = ""
    ports: int | None = None
    order: str | None = None
    frequencies: int | None = None
    noise_frequencies: int | None = None
    reference: list[float] = field(default_factory=list)
    reference_line: int = 0
    matrix: str = "full"
    mixed: tuple[str, ...] = ()
    lines: dict[str, int] = field(default_factory=dict)
    option_lines: list[tuple[int, str]] = field(default_factory=list)
    notes: list[tuple[int, str]] = field(default_factory=list)


def read_keywords(lines: list[tuple[int, str, str | None]], name_ports: int | None) -> Keywords:
    """Interpret (line number, content, comment) triples up to ``[Network Data]``."""
    kw = Keywords()
    info_from = 0
    more_reference = False
    for no, text, _ in lines:
        if not text:
            continue
        if info_from:
            if (split_keyword(text) or ("",))[0] == "end information":
                info_from = 0
            continue
        if more_reference and not text.startswith(("[", "#")):
            more_reference = _reference_values(kw, no, text)
            continue
        if more_reference:
            raise HeaderError(kw.reference_line, f"[Reference] needs {kw.ports} values, "
                                                 f"found {len(kw.reference)}")
        if text.startswith("#"):
            if not kw.version:
                raise HeaderError(no, "option line before [Version]")
            kw.option_lines.append((no, text))
            continue
        parts = split_keyword(text)
        if parts is None:
            raise HeaderError(no, "expected a keyword such as [Number of Ports], "
                                  f"found {show(text)}")
        key, arg = parts
        if key in kw.lines:
            raise HeaderError(no, f"{display(key)} given twice (first on line {kw.lines[key]})")
        kw.lines[key] = no
        if not kw.version and key != "version":
            raise HeaderError(no, "a version 2 file must start with [Version]")
        if key == "begin information":
            info_from = no
        elif key == "network data":
            break
        else:
            more_reference = _apply(kw, no, key, arg, name_ports)
    if info_from:
        raise HeaderError(info_from, "[Begin Information] without [End Information]")
    if "network data" not in kw.lines:
        raise HeaderError(0, "no [Network Data] keyword")
    if kw.ports is None:
        raise HeaderError(0, "missing [Number of Ports]")
    return kw


def _apply(kw: Keywords, no: int, key: str, arg: str, name_ports: int | None) -> bool:
    """Apply one keyword; True when [Reference] still needs values."""
    if key == "version":
        if arg not in ("2.0", "2.1"):
            raise HeaderError(no, f"[Version] must be 2.0 or 2.1, got {show(arg)}")
        kw.version = arg
    elif key == "number of ports":
        kw.ports = _count(no, key, arg)
        if name_ports is not None and name_ports != kw.ports:
            raise HeaderError(no, f"[Number of Ports] is {kw.ports} but the file name says "
                                  f"{name_ports}")
    elif key == "two-port data order":
        if arg not in ("12_21", "21_12"):
            raise HeaderError(no, f"[Two-Port Data Order] must be 12_21 or 21_12, got {show(arg)}")
        kw.order = arg
    elif key == "number of frequencies":
        kw.frequencies = _count(no, key, arg)
    elif key == "number of noise frequencies":
        kw.noise_frequencies = _count(no, key, arg)
    elif key == "matrix format":
        if arg.lower() not in ("full", "lower", "upper"):
            raise HeaderError(no, f"[Matrix Format] must be Full, Lower or Upper, got {show(arg)}")
        kw.matrix = arg.lower()
    elif key == "reference":
        if kw.ports is None:
            raise HeaderError(no, "[Reference] before [Number of Ports]")
        kw.reference_line = no
        return _reference_values(kw, no, arg)
    elif key == "mixed-mode order":
        labels = tuple(arg.upper().split())
        if kw.ports is None or len(labels) != kw.ports:
            raise HeaderError(no, f"[Mixed-Mode Order] needs one label per port ({kw.ports}), "
                                  f"found {len(labels)}")
        bad = [label for label in labels if not _MIXED.match(label)]
        if bad:
            raise HeaderError(no, f"[Mixed-Mode Order] label {show(bad[0])} is not D<i>,<j>, "
                                  "C<i>,<j> or S<i>")
        kw.mixed = labels
    else:
        kw.notes.append((no, f"unknown keyword {display(key)} ignored"))
    return False


def _count(no: int, key: str, arg: str) -> int:
    limit = MAX_PORTS if key == "number of ports" else MAX_FREQUENCIES
    digits = arg.lstrip("0")
    if not arg.isdigit() or not digits:
        shown = arg if len(arg) <= 20 else arg[:17] + "..."
        raise HeaderError(no, f"{display(key)} must be an integer >= 1, got {show(shown)}")
    if len(digits) > 9 or int(digits) > limit:
        shown = digits if len(digits) <= 20 else f"a number of {len(digits)} digits"
        raise HeaderError(no, f"{display(key)} is {shown}: sweepd reads at most {limit:,}")
    return int(digits)


def _reference_values(kw: Keywords, no: int, text: str) -> bool:
    for tok in text.split():
        if not is_number(tok.encode("ascii")):
            raise HeaderError(no, f"[Reference] value {show(tok)} is not a number")
        value = float(tok)
        if not 0 < value < math.inf:
            raise HeaderError(no, f"[Reference] value {tok} must be a positive resistance")
        kw.reference.append(value)
    assert kw.ports is not None
    if len(kw.reference) > kw.ports:
        raise HeaderError(no, f"[Reference] has {len(kw.reference)} values for {kw.ports} ports")
    return len(kw.reference) < kw.ports
