"""Byte links under the transport: exact reads, reads up to a terminator, deadlines.

Two implementations over a resource opened by pyvisa with the pyvisa-py backend:

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
- ``VisaLink`` for everything else (serial ``ASRL...::INSTR`` through pyserial, VXI-11,
  USB-TMC): reads and writes through the pyvisa-py session, switching the terminator on
  for line reads and off for exact-length binary reads (a binary payload may hold 0x0A
  bytes). With ``public=True`` it uses only pyvisa's documented library calls: the
  fallback for a socket when pyvisa-py's internals are not as tested
  (``fast_socket_problem``).
- ``HislipLink`` for HiSLIP: a ``VisaLink`` over pyvisa-py's HiSLIP client. Messages are
  framed by the protocol (DataEnd ends a reply), so a line read returns at the end of the
  message; after a fault the transport reconnects rather than draining
  (``resync_by_reconnect``).

Both raise ``LinkTimeout`` (with the bytes that did arrive) and ``LinkClosed``; the
transport turns them into messages that name the resource and the command.
"""

from __future__ import annotations

import errno
import socket
import struct
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
            raise LinkClosed(_os_text(exc)) from None
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
            raise LinkClosed(_os_text(exc)) from None

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
                raise LinkClosed(_os_text(exc), said) from None
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


class VisaLink:
    """Reads and writes through the pyvisa-py session (serial ports and the rest)."""

    resync_by_reconnect = False

    def __init__(self, resource: Any, public: bool = False) -> None:
        from pyvisa import constants

        self._c = constants
        self._lib = resource.visalib
        self._session = resource.session
        # pyvisa-py's session object returns (data, status) without raising, so the
        # bytes that did arrive before a timeout are kept for the message.
        self._raw = None if public else getattr(self._lib, "sessions", {}).get(self._session)
        self._quiet = (constants.StatusCode.success_max_count_read,
                       constants.StatusCode.success_termination_character_read)
        self._serial = resource.resource_name.upper().startswith("ASRL")
        self._timeout_ms: int | None = None
        self._mode: tuple[str, int] | None = None
        attr = constants.ResourceAttribute
        if self._serial:
            self._set(attr.asrl_end_out, constants.SerialTermination.none)

    def send(self, data: bytes, deadline: Deadline) -> None:
        from pyvisa import errors

        self._timeout(deadline.remaining())
        try:
            self._lib.write(self._session, data)
        except errors.VisaIOError as exc:
            if exc.error_code == self._c.StatusCode.error_timeout:
                raise LinkTimeout() from None
            raise LinkClosed(_one_line(exc)) from None
        except OSError as exc:  # pyserial reports a vanished port as SerialException(OSError)
            raise LinkClosed(_os_text(exc)) from None

    def read_exact(self, count: int, deadline: Deadline) -> bytes:
        self._terminator(None)
        out = bytearray()
        while len(out) < count:
            out += self._read(count - len(out), deadline, bytes(out))
        return bytes(out)

    def read_into(self, view: memoryview, deadline: Deadline) -> None:
        view[:] = self.read_exact(len(view), deadline)

    def read_until(self, byte: int, deadline: Deadline, limit: int) -> bytes:
        self._terminator(byte)
        out = bytearray()
        while not out or out[-1] != byte:
            if len(out) > limit:
                raise LinkOverflow(bytes(out[:64]))
            out += self._read(limit + 1 - len(out), deadline, bytes(out))
        return bytes(out)

    def discard_input(self) -> bytes:
        try:
            self._lib.flush(self._session, self._c.BufferOperation.discard_read_buffer)
        except OSError as exc:
            raise LinkClosed(_os_text(exc)) from None
        return b""

    def _read(self, count: int, deadline: Deadline, partial: bytes) -> bytes:
        from pyvisa import errors

        remaining = deadline.remaining()
        if remaining is not None and remaining <= 0:
            raise LinkTimeout(partial)
        self._timeout(remaining)
        status_code = self._c.StatusCode
        try:
            if self._raw is not None:
                data, status = self._raw.read(count)
            else:
                # A read that fills ``count`` or stops at the terminator is what we asked
                # for; pyvisa would warn about it (VI_SUCCESS_MAX_CNT, VI_SUCCESS_TERM_CHAR).
                with self._lib.ignore_warning(self._session, *self._quiet):
                    data, status = self._lib.read(self._session, count)
        except errors.VisaIOError as exc:
            if exc.error_code == status_code.error_timeout:
                raise LinkTimeout(partial) from None
            raise LinkClosed(_one_line(exc)) from None
        except OSError as exc:  # pyserial reports a vanished port as SerialException(OSError)
            raise LinkClosed(_os_text(exc)) from None
        if status == status_code.error_timeout:
            raise LinkTimeout(partial + bytes(data))
        if status < 0:
            raise LinkClosed(f"VISA status {status!r}")
        if not data and deadline.expired():
            raise LinkTimeout(partial)
        return bytes(data)

    def _terminator(self, byte: int | None) -> None:
        mode = ("none", 0) if byte is None else ("char", byte)
        if mode == self._mode:
            return
        attr, c = self._c.ResourceAttribute, self._c
        if byte is None:
            self._set(attr.termchar_enabled, c.VI_FALSE)
            if self._serial:
                self._set(attr.asrl_end_in, c.SerialTermination.none)
        else:
            self._set(attr.termchar, byte)
            self._set(attr.termchar_enabled, c.VI_TRUE)
            if self._serial:
                self._set(attr.asrl_end_in, c.SerialTermination.termination_char)
        self._mode = mode

    def _timeout(self, seconds: float | None) -> None:
        wanted = None if seconds is None else max(1, int(seconds * 1000))
        current = self._timeout_ms
        # Re-arm only when needed (pyserial reconfigures the port on every set): never
        # wait past the deadline by more than 20 ms, never give up before it.
        if wanted == current or (
            current is not None and wanted is not None and current - 20 <= wanted <= current
        ):
            return
        value = self._c.VI_TMO_INFINITE if wanted is None else wanted
        self._set(self._c.ResourceAttribute.timeout_value, value)
        self._timeout_ms = wanted

    def _set(self, attribute: Any, value: Any) -> None:
        self._lib.set_attribute(self._session, attribute, value)


class HislipLink(VisaLink):
    """HiSLIP through pyvisa-py's client; see the module docstring."""

    resync_by_reconnect = True

    def read_until(self, byte: int, deadline: Deadline, limit: int) -> bytes:
        out = bytearray()
        while not out or out[-1] != byte:
            if len(out) > limit:
                raise LinkOverflow(bytes(out[:64]))
            # The client allocates the whole count per call: ask for modest pieces.
            out += self._read(min(RECV_CHUNK, limit + 1 - len(out)), deadline, bytes(out))
        return bytes(out)

    def discard_input(self) -> bytes:
        return b""  # replies are framed; after a fault the transport reconnects

    def _terminator(self, byte: int | None) -> None:
        return  # DataEnd ends each message; no termination character is involved

    def _read(self, count: int, deadline: Deadline, partial: bytes) -> bytes:
        try:
            return super()._read(count, deadline, partial)
        except (RuntimeError, AssertionError, KeyError, struct.error) as exc:
            # pyvisa-py's client raises these on a closed channel or a malformed message
            text = _one_line(exc)
            if "dropped" in text.lower():
                raise LinkClosed("the instrument closed the connection") from None
            raise LinkClosed(f"HiSLIP protocol error: {text}") from None


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


def _os_text(exc: OSError) -> str:
    if exc.errno in (errno.EPIPE, errno.ECONNRESET):
        return "the instrument closed the connection"
    return _one_line(exc)


def _one_line(exc: BaseException) -> str:
    text = " ".join(str(exc).split()) or type(exc).__name__
    return text
