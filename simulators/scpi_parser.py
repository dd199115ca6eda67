"""Execute one SCPI program message: split units, resolve headers, call handlers, join replies.

A message is the bytes up to the terminator. Units are separated by ``;`` outside strings,
channel lists and blocks; each unit is ``<header>[<whitespace><params>]``. A failing unit
queues its error and the next unit still runs (the path stays where it was). Replies of
all queries in one message form one response, joined by ``;``, with the terminator added
(IEEE Std 488.2 §8.4). A message whose queries all failed gets no response at all.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any

from simulators.scpi_errors import ScpiError, Status
from simulators.scpi_params import ASCII_DIGITS, Param, block_end, split_params
from simulators.scpi_tree import CommandTree

# IEEE Std 488.2 white space: bytes 0..32 except LF (which never reaches the parser)
WHITE = "".join(chr(i) for i in range(33))
_UNIT = re.compile(r"^([^\x00-\x20]+)[\x00-\x20]*(.*)$", re.DOTALL)


@dataclass(frozen=True)
class Reply:
    """A query's response; ``data`` marks trace data (a target for wire faults)."""

    payload: bytes
    data: bool = False


@dataclass
class Call:
    """What a handler gets: the header as written, its parameters, suffixes and session."""

    header: str
    params: list[Param]
    suffixes: dict[str, int]
    session: Any

    def none(self) -> None:
        if self.params:
            raise ScpiError(-108, f"{self.header} {self.params[0].text}")

    def one(self) -> Param:
        if not self.params:
            raise ScpiError(-109, self.header)
        if len(self.params) > 1:
            raise ScpiError(-108, f"{self.header} {self.params[1].text}")
        return self.params[0]

    def optional(self) -> Param | None:
        if len(self.params) > 1:
            raise ScpiError(-108, f"{self.header} {self.params[1].text}")
        return self.params[0] if self.params else None


@dataclass(frozen=True)
class Outcome:
    """The response to send (None: nothing) and whether it carries trace data."""

    response: bytes | None
    data: bool = False


class Interpreter:
    """Runs messages against a command tree; one per session (the path is per message)."""

    def __init__(self, tree: CommandTree, status: Status, terminator: bytes,
                 session: Any = None) -> None:
        self.tree = tree
        self.status = status
        self.terminator = terminator
        self.session = session

    def execute(self, message: bytes) -> Outcome:
        text = message.decode("latin-1")
        try:
            units = split_units(text)
        except ScpiError as exc:
            self.status.push_entry(exc.entry())
            return Outcome(None)
        path: tuple = ()
        replies: list[bytes] = []
        data = False
        last = len(units) - 1
        for index, unit in enumerate(units):
            unit = unit.strip(WHITE)
            if not unit:
                if index != last and last > 0:
                    self.status.push(-102, "empty command between ';'")
                continue
            try:
                match = _UNIT.match(unit)
                if match is None:
                    raise ScpiError(-102, unit[:40])
                header, rest = match.group(1), match.group(2)
                query = header.endswith("?")
                if header.startswith("*"):
                    command = self.tree.resolve_common(header)
                    suffixes: dict[str, int] = {}
                else:
                    res = self.tree.resolve(header[:-1] if query else header, path)
                    path, command, suffixes = res.path, res.command, res.suffixes
                handler = command.query if query else command.set
                if handler is None:
                    why = "no query form" if query else "query only"
                    raise ScpiError(-113, f"{header} ({why})")
                out = handler(Call(header, split_params(rest, header), suffixes, self.session))
            except ScpiError as exc:
                self.status.push_entry(exc.entry())
                continue
            if not query or out is None:
                continue
            if isinstance(out, Reply):
                replies.append(out.payload)
                data = data or out.data
            else:
                replies.append(str(out).encode("latin-1"))
        if not replies:
            return Outcome(None)
        return Outcome(b";".join(replies) + self.terminator, data)


def split_units(text: str) -> list[str]:
    """Split a message at top-level ``;``."""
    if not any(c in text for c in "'\"(#"):
        return text.split(";")
    units, start, i, n = [], 0, 0, len(text)
    while i < n:
        c = text[i]
        if c in "'\"":
            end = text.find(c, i + 1)
            while end >= 0 and end + 1 < n and text[end + 1] == c:
                end = text.find(c, end + 2)
            if end < 0:
                raise ScpiError(-151, "unterminated string")
            i = end + 1
            continue
        if c == "(":
            end = text.find(")", i)
            i = n if end < 0 else end + 1
            continue
        if c == "#" and i + 1 < n and text[i + 1] in ASCII_DIGITS:
            i = block_end(text, i, "block")
            continue
        if c == ";":
            units.append(text[start:i])
            start = i + 1
        i += 1
    units.append(text[start:])
    return units
