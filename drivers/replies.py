"""Parsing short text replies: identity, numbers, flags, error-queue entries, tokens.

``where`` is the message prefix naming instrument and command, e.g.
``instrument TCPIP::127.0.0.1::5025::SOCKET: ':SYST:ERR?'``.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from drivers.blocks import quote
from drivers.errors import ReplyError


@dataclass(frozen=True)
class Identity:
    """The four ``*IDN?`` fields (IEEE Std 488.2, identification query)."""

    maker: str
    model: str
    serial: str
    firmware: str

    def __str__(self) -> str:
        return ",".join((self.maker, self.model, self.serial, self.firmware))


def _shown(reply: str) -> str:
    return quote(reply.encode("ascii", "replace"))


def parse_number(reply: str, where: str, *, integer: bool = False) -> float:
    """A numeric reply (NR1, NR2 or NR3 of IEEE Std 488.2), parsed by value."""
    text = reply.strip()
    try:
        value = float(text)
    except ValueError:
        raise ReplyError(f"{where} reply is not a number: {_shown(reply)}") from None
    if not math.isfinite(value) or abs(value) >= 9.89e37:
        raise ReplyError(f"{where} reply is not a finite number: {_shown(reply)}")
    if integer:
        if not value.is_integer():
            raise ReplyError(f"{where} reply is not a whole number: {_shown(reply)}")
        return int(value)
    return value


# IEEE Std 488.2 suffix units with their SI multipliers (case-insensitive: "MHZ" is mega-
# hertz and "MS" milli-second there, as in SCPI-1999 Vol. 1 §7.7.3).
UNIT_MULTIPLIERS = {
    "HZ": 1.0, "KHZ": 1e3, "MHZ": 1e6, "GHZ": 1e9, "THZ": 1e12,
    "S": 1.0, "MS": 1e-3, "US": 1e-6, "NS": 1e-9,
    "DBM": 1.0, "DB": 1.0,
}
_WITH_UNIT = re.compile(r"^\s*([-+0-9.eE]+)\s*([A-Za-z]+)\s*$")


def parse_quantity(reply: str, where: str, *, integer: bool = False) -> tuple[float, bool]:
    """A number with an optional unit suffix (``2.4 GHZ``) as ``(value, in_si_units)``.

    With a known suffix the value is returned in SI units (``True``); a bare number is
    returned as sent (``False``), for the caller's own unit scale.
    """
    match = _WITH_UNIT.match(reply)
    if match is None:
        return parse_number(reply, where, integer=integer), False
    unit = match.group(2).upper()
    multiplier = UNIT_MULTIPLIERS.get(unit)
    if multiplier is None:
        raise ReplyError(
            f"{where} reply has an unknown unit {match.group(2)[:12]!r}: {_shown(reply)}"
        )
    value = parse_number(match.group(1), where) * multiplier
    if integer:
        if not float(value).is_integer():
            raise ReplyError(f"{where} reply is not a whole number: {_shown(reply)}")
        return int(value), True
    return value, True


def parse_flag(reply: str, where: str) -> bool:
    """A boolean reply: ``1``/``0`` (SCPI answers booleans as numbers), ``ON``/``OFF``."""
    text = reply.strip().upper().lstrip("+")
    if text in ("1", "ON"):
        return True
    if text in ("0", "OFF"):
        return False
    raise ReplyError(f"{where} reply is not 1/0 or ON/OFF: {_shown(reply)}")


IDN_FIELDS = ("maker", "model", "serial", "firmware")


def parse_identity(
    reply: str, where: str, separator: str = ",", order: tuple[str, ...] = IDN_FIELDS
) -> Identity:
    """``maker,model,serial,firmware`` (IEEE Std 488.2 ``*IDN?``: four fields).

    Other instruments answer another query in another shape: ``order`` names each field
    of the reply (``skip`` for one to ignore), split at ``separator``.
    """
    fields = [f.strip() for f in reply.strip().split(separator)]
    named = dict(zip(order, fields, strict=False))
    if len(fields) != len(order) or ("maker" in order and not named["maker"]):
        shown = ", ".join(order)
        raise ReplyError(
            f"{where} reply has {len(fields)} fields, expected {len(order)} ({shown}): "
            f"{_shown(reply)}"
        )
    return Identity(*(named.get(name, "") for name in IDN_FIELDS))


def parse_error_entry(reply: str, where: str) -> tuple[int, str]:
    """``<code>,"<text>"`` (SCPI-1999 Vol. 2, SYSTem:ERRor) as ``(code, text)``."""
    head, _sep, tail = reply.strip().partition(",")
    try:
        code = int(head.strip().lstrip("+"))
    except ValueError:
        raise ReplyError(f"{where} reply is not '<code>,\"<text>\"': {_shown(reply)}") from None
    if not -32768 <= code <= 32767:
        raise ReplyError(f"{where} error code {code} is outside -32768..32767: {_shown(reply)}")
    text = tail.strip()
    if len(text) >= 2 and text[0] == text[-1] and text[0] in "\"'":
        text = text[1:-1].replace(text[0] * 2, text[0])
    return code, text


def same_token(reply: str, token: str) -> bool:
    """Compare a character-data reply with a token: case, quotes, blanks and '+' ignored."""
    return _normal(reply) == _normal(token)


def _normal(text: str) -> str:
    kept = "".join(ch for ch in text if not ch.isspace() and ch not in "\"'")
    return kept.upper().replace(",+", ",").lstrip("+")


SHOWN_ENTRIES = 5  # entries spelled out in one message; the rest are counted
SHOWN_TEXT = 80  # characters of each entry's text


def format_entries(
    entries: list[tuple[int, str]] | tuple[tuple[int, str], ...], shown: int = SHOWN_ENTRIES
) -> str:
    """``-222 "Data out of range"; -113 "Undefined header"``, bounded in count and length.

    A flooding instrument's queue stays one readable line: the first ``SHOWN_ENTRIES``
    entries (or ``shown``), each text cut to ``SHOWN_TEXT`` characters, then ``(+N more)``.
    """
    parts = []
    for code, text in entries[:shown]:
        text = "".join(ch if ch.isprintable() else "?" for ch in text)
        if len(text) > SHOWN_TEXT:
            text = text[: SHOWN_TEXT - 3] + "..."
        parts.append(f'{code} "{text}"')
    more = len(entries) - len(parts)
    return "; ".join(parts) + (f" (+{more} more)" if more > 0 else "")
