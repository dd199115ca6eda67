"""Program data: split a unit's parameters and convert them (IEEE Std 488.2 ch. 7).

Decimal numeric data (NR1/NR2/NR3) with optional unit suffixes, ``<NRf+>`` keywords
MINimum/MAXimum/DEFault, non-decimal numbers (#H, #Q, #B), booleans ON|OFF|1|0 (numbers
round, non-zero is ON), character data, strings in '…' or "…" (doubled quotes inside),
definite/indefinite blocks and channel lists ``(@1,2)`` / ``(@1:3)``. Each conversion
raises ``ScpiError`` with the standard code: −104 wrong type, −108 too many, −109 missing,
−121 bad number, −131 unknown suffix, −138 suffix not allowed, −141 bad character data,
−151 bad string, −161 bad block, −222 out of range, −224 not one of the allowed values.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from simulators.scpi_errors import ScpiError

_NUMBER = re.compile(r"^([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE]\s*[+-]?\d+)?)\s*([A-Za-z]*)$")
_CHARS = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")
_NONDECIMAL = {"H": (16, "0123456789ABCDEF"), "Q": (8, "01234567"), "B": (2, "01")}

_WHITE = "".join(chr(i) for i in range(33))
ASCII_DIGITS = "0123456789"  # str.isdigit() also accepts '²' and other Unicode digits
FREQUENCY_UNITS = {"HZ": 1.0, "KHZ": 1e3, "MHZ": 1e6, "MAHZ": 1e6, "GHZ": 1e9}
POWER_UNITS = {"DBM": 1.0}
TIME_UNITS = {"S": 1.0, "MS": 1e-3, "US": 1e-6, "NS": 1e-9}


@dataclass(frozen=True)
class Param:
    """One parameter as written; converted on demand by the handler."""

    text: str
    header: str

    def _fail(self, code: int) -> ScpiError:
        return ScpiError(code, f"{self.header} {self.text}")

    @property
    def kind(self) -> str:
        c = self.text[0]
        if c in "'\"":
            return "string"
        if c == "#":
            return "number" if len(self.text) > 1 and self.text[1].upper() in _NONDECIMAL \
                else "block"
        if c == "(":
            return "list"
        if c.isalpha():
            return "char"
        return "number"

    def number(self, lo: float, hi: float, default: float | None = None,
               units: dict[str, float] | None = None, integer: bool = False) -> float:
        """A ``<NRf+>`` value in [lo, hi]; MIN/MAX/DEF allowed, integers rounded."""
        kind = self.kind
        if kind == "char":
            word = self.text.upper()
            if word in ("MIN", "MINIMUM"):
                return lo
            if word in ("MAX", "MAXIMUM"):
                return hi
            if word in ("DEF", "DEFAULT") and default is not None:
                return default
            raise self._fail(-224 if _CHARS.match(self.text) else -141)
        if kind != "number":
            raise self._fail(-104)
        value = self._decimal(units)
        if integer:
            value = float(math.floor(value + 0.5))
        if not (lo <= value <= hi):
            raise ScpiError(-222, f"{self.header} {self.text}; allowed {_nr(lo)} to {_nr(hi)}")
        return value

    def _decimal(self, units: dict[str, float] | None) -> float:
        text = self.text
        if text[0] == "#":
            base, digits = _NONDECIMAL[text[1].upper()]
            body = text[2:].upper()
            if not body or any(c not in digits for c in body):
                raise self._fail(-121)
            return float(int(body, base))
        match = _NUMBER.match(text)
        if not match:
            raise self._fail(-121)
        value = float(match.group(1).replace(" ", ""))
        suffix = match.group(2).upper()
        if suffix:
            if not units:
                raise self._fail(-138)
            if suffix not in units:
                raise self._fail(-131)
            value *= units[suffix]
        if not math.isfinite(value):
            raise self._fail(-120)
        return value

    def boolean(self) -> bool:
        if self.kind == "char":
            word = self.text.upper()
            if word in ("ON", "OFF"):
                return word == "ON"
            raise self._fail(-224)
        if self.kind != "number":
            raise self._fail(-104)
        return math.floor(self._decimal(None) + 0.5) != 0

    def choice(self, *options: str) -> str:
        """Character data matched against ``options`` written as ``ASCii`` (short = capitals).

        Returns the option's short form, upper case.
        """
        if self.kind != "char":
            raise self._fail(-104)
        if not _CHARS.match(self.text):
            raise self._fail(-141)
        word = self.text.upper()
        for option in options:
            short = "".join(c for c in option if c.isupper() or c.isdigit())
            if word in (option.upper(), short):
                return short
        raise self._fail(-224)

    def string(self) -> str:
        if self.kind != "string":
            raise self._fail(-104)
        quote = self.text[0]
        body = self.text[1:-1]
        if len(self.text) < 2 or self.text[-1] != quote or \
                body.replace(quote * 2, "").count(quote):
            raise self._fail(-151)
        return body.replace(quote * 2, quote)

    def channels(self, lo: int, hi: int) -> list[int]:
        """A channel list ``(@1,3)`` or ``(@1:3)`` of integers in [lo, hi]."""
        if self.kind != "list":
            raise self._fail(-104)
        text = self.text
        if not (text.startswith("(@") and text.endswith(")")):
            raise self._fail(-141)
        out: list[int] = []
        for item in text[2:-1].split(","):
            item = item.strip()
            ends = item.split(":")
            if not item or len(ends) > 2 or not all(e.strip().isdigit() for e in ends):
                raise self._fail(-141)
            first, last = int(ends[0]), int(ends[-1])
            if not (lo <= first <= hi and lo <= last <= hi):
                raise ScpiError(-222, f"{self.header} {self.text}; channels {lo} to {hi}")
            step = 1 if last >= first else -1
            out.extend(range(first, last + step, step))
        return out


def split_params(text: str, header: str) -> list[Param]:
    """Split the parameter section at top-level commas (strings, lists and blocks kept)."""
    text = text.strip(_WHITE)
    if not text:
        return []
    careful = any(c in text for c in "'\"(#")
    parts = _split_careful(text, header) if careful else text.split(",")
    params = []
    for part in parts:
        part = part.strip(_WHITE)
        if not part:
            raise ScpiError(-102, f"{header} {text}; empty parameter")
        params.append(Param(part, header))
    return params


def _split_careful(text: str, header: str) -> list[str]:
    parts, start, i, n = [], 0, 0, len(text)
    while i < n:
        c = text[i]
        if c in "'\"":
            end = i + 1
            while True:
                end = text.find(c, end)
                if end < 0:
                    raise ScpiError(-151, f"{header}; unterminated string")
                if end + 1 < n and text[end + 1] == c:
                    end += 2
                    continue
                break
            i = end + 1
            continue
        if c == "(":
            end = text.find(")", i)
            if end < 0:
                raise ScpiError(-102, f"{header}; unclosed '('")
            i = end + 1
            continue
        if c == "#" and i + 1 < n and text[i + 1] in ASCII_DIGITS:
            i = block_end(text, i, header)
            continue
        if c == ",":
            parts.append(text[start:i])
            start = i + 1
        i += 1
    parts.append(text[start:])
    return parts


def block_end(text: str, i: int, header: str) -> int:
    """Index just past a block starting at ``text[i] == '#'`` (−161 if malformed)."""
    digits = int(text[i + 1])
    if digits == 0:
        return len(text)  # indefinite: runs to the end of the message
    length_text = text[i + 2: i + 2 + digits]
    if len(length_text) != digits or not set(length_text) <= set(ASCII_DIGITS):
        raise ScpiError(-161, f"{header}; bad block header {text[i:i + 2 + digits]!r}")
    end = i + 2 + digits + int(length_text)
    if end > len(text):
        raise ScpiError(-161, f"{header}; block shorter than its header says")
    return end


def _nr(value: float) -> str:
    return format_number(value)


def format_number(value: float) -> str:
    """Response number: NR1 for integral values, else shortest round-trip text."""
    if float(value).is_integer() and abs(value) < 1e15:
        return str(int(value))
    return repr(float(value))
