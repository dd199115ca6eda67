"""Reading IEEE 488.2 blocks off a link: the careful path of ``Transport`` (a mixin).

Header first (``#<d><len>``, IEEE Std 488.2 definite length arbitrary block), then
exactly the payload, then the terminator. Anything unexpected is a ``BlockError`` that
quotes the bytes, and the input is left in step (or marked for ``resync``).
"""

from __future__ import annotations

from typing import Any

from drivers.blocks import parse_header, quote
from drivers.deadline import Deadline
from drivers.errors import BlockError, ConnectionLost
from drivers.links import Link, LinkClosed, LinkOverflow, LinkTimeout


class BlockReading:
    """Block reads for ``Transport``; uses its link, terminator and recovery state."""

    resource: str
    read_termination: bytes
    _dirty: str | None
    _header: bytes

    # provided by Transport
    def _require_open(self, command: str) -> Link: ...  # pragma: no cover
    def _io(self, what: str, data: bytes | None = None,
            block: tuple[bytes, int, bytes] | None = None) -> None: ...  # pragma: no cover
    def _timed_out(self, command: str, deadline: Deadline,
                   exc: LinkTimeout) -> Any: ...  # pragma: no cover
    def _lost(self, command: str, exc: LinkClosed) -> Any: ...  # pragma: no cover
    def close(self) -> None: ...  # pragma: no cover

    def _read_block(
        self, command: str, expected: int, into: memoryview | None, deadline: Deadline, what: str
    ) -> memoryview:
        link = self._require_open(command)
        prefix = f"instrument {self.resource}: '{command}'"
        try:
            length = self._read_header(prefix, link, deadline)
            if length is not None and length != expected:
                self._skip_wrong_block(link, length, expected, deadline)
                raise BlockError(f"{prefix} {_wrong_length(length, expected, what)}")
            target = into if into is not None else memoryview(bytearray(expected))
            if len(target) != expected:
                raise ValueError("buffer size differs from the expected payload")
            self._read_payload(prefix, link, target, deadline)
            self._expect_terminator(prefix, link, deadline)
            self._io("<", block=(self._header, expected, self.read_termination))
            return target
        except BlockError:
            self._dirty = self._dirty or "garbled"
            raise
        except LinkTimeout as exc:
            self._timed_out(command, deadline, exc)
        except LinkClosed as exc:
            self._lost(command, exc)

    def _read_header(self, prefix: str, link: Link, deadline: Deadline) -> int | None:
        """Consume ``#<d><digits>``; the payload length, or ``None`` for ``#0``."""
        head = link.read_exact(1, deadline)
        if head == b"#":
            head += link.read_exact(1, deadline)
            if head[1:].isdigit() and head[1:] != b"0":
                head += link.read_exact(head[1] - 0x30, deadline)
        self._header = head
        try:
            _, length = parse_header(head)
        except BlockError as exc:
            if self.read_termination[-1] not in head:
                head += self._rest_of_line(link, deadline)
            self._io("<", head)
            detail = str(exc).split(": starts ")[0]
            raise BlockError(f"{prefix} {detail}: starts {quote(head)}") from None
        return length

    def _rest_of_line(self, link: Link, deadline: Deadline) -> bytes:
        short = Deadline(min(deadline.remaining() or 1.0, 1.0))
        try:
            return link.read_until(self.read_termination[-1], short, 4096)
        except (LinkTimeout, LinkOverflow) as exc:
            self._dirty = "timeout"
            return exc.partial

    def _skip_wrong_block(self, link: Link, length: int, expected: int, deadline: Deadline) -> None:
        """Consume a block of the wrong size so the next reply starts in step."""
        if length > 4 * expected + (1 << 20):
            self._dirty = "timeout"  # absurd length: resynchronise instead of reading it
            return
        try:
            link.read_exact(length + len(self.read_termination), deadline)
        except LinkTimeout:
            self._dirty = "timeout"

    def _read_payload(self, prefix: str, link: Link, view: memoryview, deadline: Deadline) -> None:
        try:
            link.read_into(view, deadline)
        except LinkTimeout:
            self._dirty = "timeout"
            raise BlockError(
                f"{prefix} block truncated: {len(view)} payload bytes announced, fewer arrived "
                f"within {deadline.seconds:.3g} s"
            ) from None
        except LinkClosed as exc:
            self.close()
            raise ConnectionLost(f"{prefix} block truncated: {exc.args[0]}") from None

    def _expect_terminator(self, prefix: str, link: Link, deadline: Deadline) -> None:
        term = self.read_termination
        tail = b""
        try:
            tail = link.read_exact(1, deadline)
            if tail == term[-1:]:
                return  # a lone LF is accepted for CR LF
            if len(term) > 1 and tail == term[:1]:
                tail += link.read_exact(len(term) - 1, deadline)
                if tail == term:
                    return
        except LinkTimeout:
            pass
        self._dirty = self._dirty or "garbled"
        shown = quote(tail) if tail else "nothing"
        raise BlockError(
            f"{prefix} block payload is followed by {shown}, expected the terminator {term!r} "
            "(more data than announced)"
        )



def _wrong_length(length: int, expected: int, what: str) -> str:
    return f"block holds {length} bytes, expected {expected}" + (f" ({what})" if what else "")
