"""One instrument conversation: commands out, short replies in, under the dialect's habits.

Every other part of the analyzer adapter talks through this: it knows the transport, the
dialect's ``*OPC?`` habit and how to name a command in a message.
"""

from __future__ import annotations

from drivers.blocks import quote
from drivers.dialect_model import Dialect
from drivers.errors import ReplyError
from drivers.transport import Transport


class Conversation:
    """Write commands and read one-line replies for one analyzer."""

    def __init__(self, transport: Transport, dialect: Dialect, resource: str) -> None:
        self.transport = transport
        self.dialect = dialect
        self.resource = resource

    def write(self, command: str) -> None:
        self.transport.write(command)

    def query(self, command: str, timeout_s: float | None = None) -> str:
        """Send ``command`` and return its one-line reply."""
        self.transport.write(command)
        return self.transport.read_line(command, timeout_s)

    def send_setting(self, command: str) -> None:
        """Send a setting; with ``opc_after_setting`` wait for ``*OPC?`` after it."""
        self.write(command)
        if self.dialect.opc_after_setting:
            self.wait_opc(command)

    def wait_opc(self, after: str, timeout_s: float | None = None) -> None:
        """Ask ``*OPC?`` (the dialect's form) and require ``1``."""
        command = self.dialect.opc_query.render()
        reply = self.query(command, timeout_s)
        if reply.strip().lstrip("+") != "1":
            raise ReplyError(
                f"instrument {self.resource}: '{command}' after '{after}' replied "
                f"{quote(reply.encode())}, expected 1"
            )

    def where(self, command: str) -> str:
        """The message prefix naming instrument and command."""
        return f"instrument {self.resource}: '{command}'"
