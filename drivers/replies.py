"""Parsing short text replies: identity, numbers, flags, error-queue entries, tokens.

``where`` is the message prefix naming instrument and command, e.g.
``instrument TCPIP::127.0.0.1::5025::SOCKET: ':SYST:ERR?'``.
"""

from __future__ import annotations

import math
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


def parse_flag(reply: str, where: str) -> bool:
    """A boolean reply: ``1``/``0`` (SCPI answers booleans as numbers), ``ON``/``OFF``."""
    text = reply.strip().upper().lstrip("+")
    if text in ("1", "ON"):
        return True
    if text in ("0", "OFF"):
        return False
    raise ReplyError(f"{where} reply is not 1/0 or ON/OFF: {_shown(reply)}")


def parse_identity(reply: str, where: str) -> Identity:
    """``maker,model,serial,firmware`` (IEEE Std 488.2 ``*IDN?``: four fields)."""
    fields = [f.strip() for f in reply.strip().split(",")]
    if len(fields) != 4 or not fields[0]:
        raise ReplyError(
            f"{where} reply has {len(fields)} fields, expected 4 (maker, model, serial, "
            f"firmware): {_shown(reply)}"
        )
    return Identity(*fields)


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


def format_entries(entries: list[tuple[int, str]] | tuple[tuple[int, str], ...]) -> str:
    """``-222 "Data out of range"; -113 "Undefined header"``."""
    return "; ".join(f'{code} "{text}"' for code, text in entries)
