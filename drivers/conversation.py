"""One instrument conversation: commands out, short replies in, under the dialect's habits.

Every other part of the analyzer adapter talks through this: it knows the transport, the
dialect's ``*OPC?`` habit, its quirks (a separate read request after each query, a delay
after certain commands, padded, quoted or unit-suffixed replies) and how to name a
command in a message.
"""

from __future__ import annotations

import time

from drivers.blocks import quote
from drivers.dialect_model import Dialect
from drivers.errors import ReplyError
from drivers.replies import parse_number, parse_quantity
from drivers.transport import Transport

PADDING = " \t\0"


class Conversation:
    """Write commands and read one-line replies for one analyzer."""

    def __init__(self, transport: Transport, dialect: Dialect, resource: str) -> None:
        self.transport = transport
        self.dialect = dialect
        self.resource = resource
        self.quirks = dialect.quirks
        self._plain = not (
            self.quirks.unquote or self.quirks.strip_padding or self.quirks.read_request
        )

    def write(self, command: str) -> None:
        """Send one message; wait afterwards when the dialect lists a delay for it."""
        self.transport.write(command)
        if self.quirks.delays:
            upper = command.upper()
            for prefix, seconds in self.quirks.delays:
                if upper.startswith(prefix):
                    time.sleep(seconds)
                    break

    def ask(self, command: str) -> None:
        """Send a query (and the dialect's separate read request, if it has one)."""
        self.write(command)
        if self.quirks.read_request is not None:
            self.transport.write(self.quirks.read_request.render())

    def query(self, command: str, timeout_s: float | None = None) -> str:
        """Send ``command`` and return its one-line reply (padding and quotes removed)."""
        if self._plain:
            self.write(command)
            return self.transport.read_line(command, timeout_s)
        self.ask(command)
        return self.clean(self.transport.read_line(command, timeout_s))

    def clean(self, reply: str) -> str:
        """A reply without the padding and quotes the dialect says the instrument adds."""
        if self.quirks.strip_padding:
            reply = reply.strip(PADDING)
        if self.quirks.unquote:
            text = reply.strip()
            if len(text) >= 2 and text[0] == text[-1] and text[0] in "\"'":
                reply = text[1:-1]
        return reply

    def number(self, command: str, *, integer: bool = False, scale: float = 1.0) -> float:
        """A numeric reply in SI units: a unit suffix when given, else times ``scale``."""
        reply = self.query(command)
        where = self.where(command)
        if self.quirks.unit_suffixes:
            value, in_si = parse_quantity(reply, where, integer=integer)
            return value if in_si or integer else value * scale
        value = parse_number(reply, where, integer=integer)
        return value if integer else value * scale

    def send_setting(self, command: str) -> None:
        """Send a setting; with ``opc_after_setting`` wait for ``*OPC?`` after it."""
        self.write(command)
        if self.dialect.opc_after_setting:
            self.wait_opc(command)

    def wait_opc(self, after: str, timeout_s: float | None = None) -> None:
        """Ask ``*OPC?`` (the dialect's form) and require ``1``."""
        opc = self.dialect.opc_query
        assert opc is not None  # the parser requires it wherever it is used
        command = opc.render()
        reply = self.query(command, timeout_s)
        if reply.strip().lstrip("+") != "1":
            raise ReplyError(
                f"instrument {self.resource}: '{command}' after '{after}' replied "
                f"{quote(reply.encode())}, expected 1"
            )

    def where(self, command: str) -> str:
        """The message prefix naming instrument and command."""
        return f"instrument {self.resource}: '{command}'"
