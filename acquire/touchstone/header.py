"""The option line and the version 2 keyword lines of a Touchstone file.

Rules cited from the Touchstone File Format Specification 2.0 (IBIS Open Forum, 2009),
which also restates version 1.0: the option line is ``# <unit> <parameter> <format>
R <n>``, fields case-insensitive and optional, defaults ``GHz S MA R 50``; version 1.1
(named so by the 2.1 specification) allows one resistance per port after ``R``.
"""

from __future__ import annotations

from dataclasses import dataclass

from drivers.yamlnode import show

from .numparse import is_number

UNIT_EXPONENTS = {"hz": 0, "khz": 3, "mhz": 6, "ghz": 9}
UNIT_NAMES = {0: "Hz", 3: "kHz", 6: "MHz", 9: "GHz"}
_PARAMS = ("s", "y", "z", "h", "g")
_FORMATS = ("db", "ma", "ri")
_ALLOWED = "Hz kHz MHz GHz, S Y Z H G, DB MA RI, R <ohms>"


@dataclass
class OptionLine:
    """Parsed option line; ``line`` is 0 when the file has none (defaults apply)."""

    unit_exp: int = 9
    parameter: str = "S"
    fmt: str = "MA"
    resistance: tuple[float, ...] = (50.0,)
    line: int = 0

    @property
    def unit(self) -> str:
        return UNIT_NAMES[self.unit_exp]


def parse_option_line(text: str, line: int) -> OptionLine:
    """Parse the text after ``#``; raises ValueError with a one-line reason."""
    opt = OptionLine(line=line)
    seen: set[str] = set()
    tokens = text.split()
    k = 0
    while k < len(tokens):
        tok = tokens[k]
        low = tok.lower()
        if low in UNIT_EXPONENTS:
            kind, opt.unit_exp = "frequency unit", UNIT_EXPONENTS[low]
        elif low in _PARAMS:
            kind, opt.parameter = "parameter", low.upper()
        elif low in _FORMATS:
            kind, opt.fmt = "format", low.upper()
        elif low == "r":
            kind = "R"
            values = []
            while k + 1 < len(tokens) and is_number(tokens[k + 1].encode("ascii")):
                k += 1
                values.append(float(tokens[k]))
            if not values:
                raise ValueError("option line: R must be followed by a resistance in ohms")
            bad = [v for v in values if not 0 < v < float("inf")]
            if bad:
                raise ValueError(
                    f"option line: reference resistance must be positive, got {bad[0]:g}")
            opt.resistance = tuple(values)
        else:
            raise ValueError(f"option line: unknown field {show(tok)} (allowed: {_ALLOWED})")
        if kind in seen:
            raise ValueError(f"option line: {kind} given twice ({show(tok)})")
        seen.add(kind)
        k += 1
    return opt


def split_keyword(text: str) -> tuple[str, str] | None:
    """``"[Number of Ports] 2"`` -> ``("number of ports", "2")``; None if malformed."""
    close = text.find("]")
    if not text.startswith("[") or close < 0:
        return None
    name = " ".join(text[1:close].split()).lower()
    return name, text[close + 1:].strip()
