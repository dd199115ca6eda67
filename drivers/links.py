"""Byte links under the transport: exact reads, reads up to a terminator, deadlines.

Implementations over a resource opened by pyvisa with the pyvisa-py backend:

- ``SocketLink`` for ``TCPIP::host::port::SOCKET``. pyvisa-py opens the connection; this
  link then does the I/O on the session's own socket (pyvisa-py keeps it as
  ``session.interface``), after taking over whatever pyvisa-py had buffered, so no byte is
  lost or reordered. Measured reasons: pyvisa-py 0.8's socket reader copies each chunk
  three to four times into fresh buffers (page faults dominate on large blocks: ~8x the
  raw-socket time at 10,001 points here), rescans its whole buffer for the terminator on
  every chunk (quadratic on long ASCII replies), spins on a peer that closed until the
  deadline and uses the wall clock; its writer waits for the socket without any deadline.
  This link receives payloads straight into the caller's buffer (``recv_into``), scans only
  new bytes for the terminator, reports a closed peer at once, and keeps monotonic
  deadlines for reads and writes.
- ``VisaLink`` (``drivers.visalinks``) for serial ``ASRL...::INSTR`` (pyserial) and
  USB-TMC: reads and writes through the pyvisa-py session, switching the terminator on
  for line reads and off for exact-length binary reads (a binary payload may hold 0x0A
  bytes). With ``public=True`` it uses only pyvisa's documented library calls: the
  fallback for a socket when pyvisa-py's internals are not as tested
  (``fast_socket_problem``).
- ``HislipLink`` (``drivers.visalinks``) for HiSLIP and VXI-11 through pyvisa-py's
  clients. Both protocols frame messages (DataEnd; the END flag), so a line read returns
  at the end of the message; after a fault the transport reconnects rather than draining
  (``resync_by_reconnect``).

All raise ``LinkTimeout`` (with the bytes that did arrive) and ``LinkClosed``; the
transport turns them into messages that name the resource and the command.
"""

from __future__ import annotations

import errno
import socket
from typing import Any, Protocol

from drivers.deadline import Deadline

RECV_CHUNK = 65536
ARM_SLACK_S = 0.01  # a wait may end this much after its deadline
# pyvisa-py releases whose socket session internals the fast path was tested with
# (keep in step with the bound in pyproject.toml).
TESTED_PYVISA_PY = ((0, 8),)


class LinkTimeout(Exception):
    """The deadline passed; ``partial`` holds what arrived of the awaited reply."""

    def __init__(self, partial: bytes = b"") -> None:
        super().__init__(partial)
        self.partial = partial


class LinkOverflow(Exception):
    """A line grew past the limit without a terminator; ``partial`` holds its start."""

    def __init__(self, partial: bytes = b"") -> None:
        super().__init__(partial)
        self.partial = partial


class LinkClosed(Exception):
    """The peer closed the link or the OS reported it broken; ``args[0]`` says how.

    ``said`` holds the start of what the peer sent just before it hung up, if anything.
    """

    def __init__(self, how: str, said: bytes = b"") -> None:
        super().__init__(how, said)
        self.said = said


class Link(Protocol):
    resync_by_reconnect: bool

    def send(self, data: bytes, deadline: Deadline) -> None: ...
    def read_exact(self, count: int, deadline: Deadline) -> bytes: ...
    def read_into(self, view: memoryview, deadline: Deadline) -> None: ...
    def read_until(self, byte: int, deadline: Deadline, limit: int) -> bytes: ...
    def discard_input(self) -> bytes: ...


class SocketLink:
    """Does the I/O on the session's socket directly; see the module docstring for why.

    The socket runs in timeout mode: each operation sets the time left on its deadline
    and CPython waits for readiness in C, so the usual path is one wait and one
    ``recv_into`` with no exceptions raised.
    """

    resync_by_reconnect = False

    def __init__(self, sock: socket.socket, pending: bytes = b"") -> None:
        self._sock = sock
        self._buf = bytearray(pending)
        self._scanned = 0  # bytes of _buf already searched for the terminator
        self._rx = memoryview(bytearray(RECV_CHUNK))  # the fast path's receive buffer
        self._timeout: float | None = -1.0  # the socket's timeout as last set (-1: unknown)

    # -- primitives --------------------------------------------------------------------
    def _arm(self, deadline: Deadline) -> None:
        """Set the socket timeout to the time left (re-armed only when it matters:
        ``settimeout`` costs a system call, and a sweep loop repeats the same deadline)."""
        remaining = deadline.remaining()
        if remaining is None:
            if self._timeout is not None:
                self._sock.settimeout(None)
                self._timeout = None
            return
        if remaining <= 0:
            raise LinkTimeout()
        current = self._timeout
        if current is None or not 0.0 <= current - remaining <= ARM_SLACK_S:
            self._sock.settimeout(remaining)
            self._timeout = remaining

    def _recv_into(self, target: memoryview, deadline: Deadline) -> int:
        """Receive at least one byte into ``target`` within the deadline."""
        self._arm(deadline)
        try:
            count = self._sock.recv_into(target)
        except TimeoutError:
            raise LinkTimeout() from None
        except OSError as exc:
            raise LinkClosed(os_text(exc)) from None
        if count == 0:
            raise LinkClosed("the instrument closed the connection")
        return count

    def send(self, data: bytes, deadline: Deadline) -> None:
        self._arm(deadline)
        try:
            self._sock.sendall(data)
        except TimeoutError:
            raise LinkTimeout() from None
        except OSError as exc:
            raise LinkClosed(os_text(exc)) from None

    # -- the sweep's fast path -----------------------------------------------------------
    def exchange_block(
        self, message: bytes, header: bytes, view: memoryview, term: bytes, deadline: Deadline
    ) -> bool:
        """Send ``message``; receive a reply of exactly ``header`` + payload + ``term``.

        The payload lands in ``view`` (one copy for the part that came with the header,
        none for the rest). When anything differs (input already pending, another header,
        no terminator, a timeout, a closed link) every byte received stays buffered and the
        result is False: the caller then reads the reply the careful way, with the same
        deadline, and reports exactly what went wrong.
        """
        self.send(message, deadline)
        if self._buf:
            return False
        rx, hlen, plen, tlen = self._rx, len(header), len(view), len(term)
        total = hlen + plen + tlen
        got = self._some(rx[: min(total, len(rx))], deadline)
        if got == total and rx[:hlen] == header and rx[total - tlen : total] == term:
            view[:] = rx[hlen : hlen + plen]  # the usual case: all of it in one piece
            return True
        while 0 < got < hlen:
            count = self._some(rx[got : min(total, len(rx))], deadline)
            if not count:
                break
            got += count
        if got < hlen or rx[:hlen] != header:
            self._buf += rx[:got]
            return False
        have = min(got - hlen, plen)
        view[:have] = rx[hlen : hlen + have]
        tail = bytes(rx[hlen + have : got])
        while have < plen:
            count = self._some(view[have:], deadline)
            if not count:
                self._buf += header + view[:have]
                return False
            have += count
        while len(tail) < tlen:
            count = self._some(rx[: tlen - len(tail)], deadline)
            if not count:
                break
            tail += rx[:count]
        if tail != term:
            self._buf += header + view + tail
            return False
        return True

    def _some(self, target: memoryview, deadline: Deadline) -> int:
        """Like ``_recv_into`` but 0 instead of an exception (the caller falls back)."""
        try:
            return self._recv_into(target, deadline)
        except (LinkTimeout, LinkClosed):
            return 0

    # -- general reads -------------------------------------------------------------------
    def read_exact(self, count: int, deadline: Deadline) -> bytes:
        while len(self._buf) < count:
            self._fill(deadline)
        return self._take(count)

    def read_into(self, view: memoryview, deadline: Deadline) -> None:
        have = min(len(self._buf), len(view))
        if have:
            view[:have] = self._buf[:have]
            del self._buf[:have]
            self._scanned = 0
        got, total = have, len(view)
        while got < total:
            try:
                got += self._recv_into(view[got:], deadline)
            except LinkTimeout:
                raise LinkTimeout(bytes(view[: min(got, 64)])) from None
            except LinkClosed:
                raise LinkClosed(
                    f"the instrument closed the connection after {got} of {total} bytes"
                ) from None

    def read_until(self, byte: int, deadline: Deadline, limit: int) -> bytes:
        while True:
            index = self._buf.find(byte, self._scanned)
            if index >= 0:
                self._scanned = 0
                return self._take(index + 1)
            self._scanned = len(self._buf)
            if len(self._buf) > limit:
                raise LinkOverflow(bytes(self._buf[:64]))
            self._fill(deadline)

    def discard_input(self) -> bytes:
        said = bytes(self._buf[:256])
        self._buf.clear()
        self._scanned = 0
        self._sock.settimeout(0.0)
        self._timeout = 0.0
        while True:
            try:
                chunk = self._sock.recv(RECV_CHUNK)
            except (BlockingIOError, InterruptedError):
                return said
            except OSError as exc:
                raise LinkClosed(os_text(exc), said) from None
            if not chunk:
                raise LinkClosed("the instrument closed the connection", said)
            said = (said + chunk)[:256]

    def _take(self, count: int) -> bytes:
        out = bytes(self._buf[:count])
        del self._buf[:count]
        self._scanned = max(0, self._scanned - count)
        return out

    def _fill(self, deadline: Deadline) -> None:
        rx = self._rx
        try:
            count = self._recv_into(rx, deadline)
        except LinkTimeout:
            raise LinkTimeout(bytes(self._buf[:64])) from None
        except LinkClosed as exc:
            raise LinkClosed(exc.args[0], bytes(self._buf[:256])) from None
        self._buf += rx[:count]


def fast_socket_problem(resource: Any) -> str | None:
    """Why the raw-socket fast path cannot take over this pyvisa-py session, or None.

    The fast path relies on three internals of pyvisa-py's socket session: the library's
    ``sessions`` table, the session's ``interface`` (the connected socket) and its
    ``_pending_buffer`` (bytes read ahead). Any of them missing or changed turns it off.
    """
    sessions = getattr(resource.visalib, "sessions", None)
    if not isinstance(sessions, dict):
        return "pyvisa-py has no sessions table"
    session = sessions.get(resource.session)
    if session is None:
        return "pyvisa-py's sessions table does not hold the session"
    if not isinstance(getattr(session, "interface", None), socket.socket):
        return "pyvisa-py's socket session has no socket in 'interface'"
    if not isinstance(getattr(session, "_pending_buffer", None), bytearray):
        return "pyvisa-py's socket session has no '_pending_buffer' bytearray"
    return None


def os_text(exc: OSError) -> str:
    if exc.errno in (errno.EPIPE, errno.ECONNRESET):
        return "the instrument closed the connection"
    return one_line(exc)


def one_line(exc: BaseException) -> str:
    text = " ".join(str(exc).split()) or type(exc).__name__
    return text
