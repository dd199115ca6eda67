"""Data format negotiation: which encoding and byte order the trace data travel in.

The dialect lists the encodings it offers in order of preference; a caller may ask for
one (and a byte order). Each candidate is selected, read back when the dialect has a
format query, and refused when the read-back differs or the error queue fills.
"""

from __future__ import annotations

import sys
from typing import Any

from drivers.conversation import Conversation
from drivers.dialect_model import DataFormat, Dialect
from drivers.error_queue import ErrorQueue
from drivers.errors import DialectError, SettingMismatch
from drivers.replies import format_entries, same_token

FORMAT_ALIASES = {
    "ascii": "ascii",
    "asc": "ascii",
    "real32": "real32",
    "real,32": "real32",
    "real64": "real64",
    "real,64": "real64",
    "real": "real64",
}
NATIVE_ORDER = sys.byteorder  # "little" on every platform we run on


def check_format(dialect: Dialect, data_format: str | None) -> str | None:
    """The encoding asked for (``ascii``, ``real32``, ``real64``), checked against the dialect."""
    if data_format is None:
        return None
    encoding = FORMAT_ALIASES.get(str(data_format).strip().lower())
    if encoding is None:
        raise DialectError(
            f"{dialect.source}: data format must be one of ascii, real32, real64, "
            f"got {data_format!r}"
        )
    dialect.data_format(encoding)  # DialectError when the dialect lacks it
    return encoding


def check_order(dialect: Dialect, byte_order: str | None) -> str | None:
    """The byte order asked for, checked against what the dialect can select."""
    if byte_order is None:
        return None
    order = str(byte_order).strip().lower()
    if order not in ("big", "little"):
        raise DialectError(
            f"{dialect.source}: byte order must be big or little, got {byte_order!r}"
        )
    orders = dialect.byte_orders
    if orders is None:
        raise DialectError(f"{dialect.source}: has no binary formats, so no byte order to choose")
    if orders.fixed and order != orders.preferred:
        raise DialectError(
            f"{dialect.source}: data.byte_order is fixed to {orders.preferred}, got {order!r}"
        )
    return order


class FormatChoice:
    """Negotiates the data format once per session; holds the outcome."""

    def __init__(self, talk: Conversation, errors: ErrorQueue, want_format: str | None,
                 want_order: str | None) -> None:
        self.talk = talk
        self.errors = errors
        self.want_format = want_format
        self.want_order = want_order
        self.format: DataFormat | None = None
        self.order = "little"
        self.in_place = False  # REAL,64 re/im pairs in the host's order are complex128 already

    def choose(self) -> None:
        """Select the first encoding (and byte order) the instrument accepts."""
        d = self.talk.dialect
        candidates = [d.data_format(self.want_format)] if self.want_format else list(d.formats)
        refusals = []
        for fmt in candidates:
            reason = self._try_format(fmt)
            if reason is None:
                self.format = fmt
                self.in_place = (
                    fmt.encoding == "real64" and d.layout == "re_im" and self.order == NATIVE_ORDER
                )
                return
            refusals.append(f"{fmt.encoding}: {reason}")
        raise SettingMismatch(
            f"instrument {self.talk.resource}: refused every data format tried "
            f"({'; '.join(refusals)})"
        )

    def _try_format(self, fmt: DataFormat) -> str | None:
        """Select ``fmt`` (and a byte order); ``None`` when accepted, else why not."""
        d = self.talk.dialect
        if fmt.set is not None:
            reason = self._select(fmt.set.render(), d.format_query, fmt.reply)
            if reason:
                return reason
        if not fmt.binary:
            return None
        orders = d.byte_orders
        assert orders is not None  # the dialect loader requires it with binary formats
        if orders.fixed:
            self.order = orders.preferred
            return None
        wanted = [self.want_order] if self.want_order else [orders.preferred]
        if not self.want_order:
            wanted.append("big" if orders.preferred == "little" else "little")
        reasons = []
        for order in wanted:
            command, reply = orders.command(order)
            assert command is not None
            reason = self._select(command.render(), orders.query, reply)
            if reason is None:
                self.order = order
                return None
            reasons.append(f"byte order {order}: {reason}")
        return ", ".join(reasons)

    def _select(self, command: str, query: Any, reply: str | None) -> str | None:
        self.talk.send_setting(command)
        problem = None
        if query is not None and reply is not None:
            text = self.talk.query(query.render())
            if not same_token(text, reply):
                problem = f"'{query.text}' read back {text.strip()!r} after '{command}'"
        entries = self.errors.drain()
        if entries:
            problem = f"'{command}' raised {format_entries(entries, shown=1)}"
        return problem
