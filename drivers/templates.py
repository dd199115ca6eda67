"""Command templates and tokens from dialect files, and the only way values enter a command.

A template is printable ASCII with named placeholders (``:SENS:FREQ:STAR {value}``). The
driver fills them from numbers it formats itself (``format_number``) or from tokens of the
dialect's own tables; nothing from a plan is ever formatted into a command, so a plan
cannot inject commands. Tokens are checked when the dialect loads: printable, no braces,
and no ``;`` or ``?`` outside a quoted string (IEEE Std 488.2 program messages: ``;`` separates
message units, so a bare one would start a second command).
"""

from __future__ import annotations

import math
import string
from dataclasses import dataclass

from drivers.yamlnode import show

_FORMATTER = string.Formatter()


class TemplateProblem(ValueError):
    """Why a template or token is unusable (the dialect loader adds file and key)."""


@dataclass(frozen=True)
class Template:
    """A validated command template; ``fields`` are its placeholder names."""

    text: str
    fields: frozenset[str] = frozenset()

    @classmethod
    def parse(cls, text: str, allowed: frozenset[str] | set[str] = frozenset()) -> Template:
        """Check ``text`` and return a template using only ``allowed`` placeholders."""
        _check_printable(text, "template")
        fields: set[str] = set()
        try:
            parts = list(_FORMATTER.parse(text))
        except ValueError as exc:
            raise TemplateProblem(f"unbalanced braces in {show(text)} ({exc})") from None
        for literal, field, spec, conversion in parts:
            if "{" in literal or "}" in literal:
                raise TemplateProblem(f"literal braces are not allowed in {show(text)}")
            if field is None:
                continue
            if spec or conversion:
                raise TemplateProblem(
                    f"placeholder {{{field}}} may not carry a format or conversion in {show(text)}"
                )
            if field not in allowed:
                known = ", ".join("{" + a + "}" for a in sorted(allowed))
                found = "{" + field + "}"
                raise TemplateProblem(
                    f"template may only use {known}, found {found}"
                    if allowed
                    else f"template takes no placeholders, found {found}"
                )
            fields.add(field)
        return cls(text, frozenset(fields))

    def render(self, **values: str) -> str:
        """Fill the placeholders; every value must already be a checked string."""
        missing = self.fields - values.keys()
        if missing:
            raise KeyError(f"template {show(self.text)} needs {sorted(missing)}")
        if not self.fields:
            return self.text
        return self.text.format(**{k: v for k, v in values.items() if k in self.fields})

    @property
    def is_query(self) -> bool:
        return "?" in self.text


def check_token(token: object, what: str = "token") -> str:
    """A dialect token (trace name, standard switch address, reply text) or a problem."""
    if not isinstance(token, str) or not token.strip():
        raise TemplateProblem(f"{what} must be a non-empty string, got {show(token)}")
    _check_printable(token, what)
    if "{" in token or "}" in token:
        raise TemplateProblem(f"{what} {show(token)} may not contain braces")
    bare = _outside_quotes(token)
    for char in ";?":
        if char in bare:
            raise TemplateProblem(f"{what} {show(token)} may not contain a bare {char!r}")
    return token


def format_number(value: float | int, integer: bool = False) -> str:
    """A finite number as SCPI ``<NRf>`` text: ``2450000000.0``, ``-10.0``, ``1E-05``."""
    if integer:
        if isinstance(value, float) and not value.is_integer():
            raise ValueError(f"expected a whole number, got {show(value)}")
        return str(int(value))
    number = float(value)
    if not math.isfinite(number):
        raise ValueError(f"cannot send a non-finite number ({show(number)})")
    return repr(number).upper()


def _check_printable(text: object, what: str) -> None:
    if not isinstance(text, str) or not text:
        raise TemplateProblem(f"{what} must be a non-empty string, got {show(text)}")
    for index, char in enumerate(text):
        if not " " <= char <= "~":
            kind = "a newline" if char in "\r\n" else f"the character {char!r}"
            raise TemplateProblem(f"{what} {show(text)} contains {kind} at position {index}")


def _outside_quotes(text: str) -> str:
    """``text`` with every complete '...' or "..." string removed."""
    out: list[str] = []
    quote = ""
    for char in text:
        if quote:
            if char == quote:
                quote = ""
        elif char in "'\"":
            quote = char
        else:
            out.append(char)
    if quote:
        raise TemplateProblem(f"unterminated quoted string in {show(text)}")
    return "".join(out)
