"""Message transport to one instrument: pyvisa with the pyvisa-py backend.

Resources are VISA resource strings checked by ``drivers.resources`` (socket, HiSLIP,
VXI-11, serial, USB-TMC). The transport frames messages (terminators, IEEE 488.2 blocks),
keeps connect and I/O deadlines apart (seconds, monotonic clock) and turns every pyvisa,
pyserial and OS failure into a ``drivers.errors`` exception whose one-line message names
the resource and the command.

After a timeout or a malformed reply the transport resynchronises before the next command
(``resync``): it drops input until the line has been quiet for a moment; after a timeout
it first waits for the late reply and, on a socket, reconnects if none comes (HiSLIP and
VXI-11 always reconnect). A late reply is never read as the answer to the next query.
Not thread-safe: one owner, one command in flight.
"""

from __future__ import annotations

import contextlib
import logging
import os
import socket
import time
from collections.abc import Mapping
from typing import Any

from drivers import iolog
from drivers.blockread import BlockReading
from drivers.blocks import encode_header, quote
from drivers.deadline import Deadline
from drivers.errors import (
    ConnectError,
    ConnectionLost,
    InstrumentTimeout,
    ReplyError,
)
from drivers.links import (
    Link,
    LinkClosed,
    LinkOverflow,
    LinkTimeout,
    SocketLink,
    fast_socket_problem,
)
from drivers.resources import parse_resource
from drivers.serialsettings import SerialSettings, visa_serial_kwargs
from drivers.visalinks import HislipLink, VisaLink
from drivers.visaopen import OpenFailed, describe, open_session, resource_manager

LOG = logging.getLogger("sweepd.transport")
_WARNED: set[str] = set()

MAX_LINE = 64 * 1024 * 1024  # longest text reply accepted (a 200,001-point ASCII trace is ~8 MB)
REFUSAL_WAIT_S = 0.05  # how long a refusing instrument gets to say so and hang up
RESYNC_QUIET_S = 0.1  # input must stay silent this long before the next command after an error


class Transport(BlockReading):
    """One instrument connection; constructing it does no I/O."""

    def __init__(
        self,
        resource: str,
        *,
        write_termination: str = "\n",
        read_termination: str = "\n",
        timeout_s: float = 5.0,
        connect_timeout_s: float = 5.0,
        serial: SerialSettings | Mapping[str, Any] | None = None,
        fast_socket: bool = True,
    ) -> None:
        info = parse_resource(resource, where="instrument")
        for name, value in (("timeout_s", timeout_s), ("connect_timeout_s", connect_timeout_s)):
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not value > 0:
                raise ConnectError(
                    f"instrument {resource}: {name} must be a positive number of seconds, "
                    f"got {value!r}"
                )
        if not read_termination or not write_termination:
            raise ConnectError(f"instrument {resource}: terminators must not be empty")
        self.resource = resource
        self.timeout_s = float(timeout_s)
        self.connect_timeout_s = float(connect_timeout_s)
        self.write_termination = write_termination.encode("ascii")
        self.read_termination = read_termination.encode("ascii")
        self.kind = info.kind
        self.host, self.port = info.host, info.port
        self.is_serial = info.kind == "serial"
        self.fast_socket = fast_socket
        if isinstance(serial, Mapping):
            serial = SerialSettings.from_mapping(serial, resource)
        elif serial is not None:
            serial.check(resource)
        self.serial = serial or SerialSettings()
        self._resource: Any = None
        self._link: Link | None = None
        self._dirty: str | None = None  # None, 'garbled' or 'timeout'
        self._headers: dict[int, bytes] = {}  # expected payload length -> block header
        self._header = b""  # the last block header read (for the I/O log)

    # -- lifetime ------------------------------------------------------------------
    @property
    def is_open(self) -> bool:
        return self._link is not None

    def open(self) -> None:
        """Connect within ``connect_timeout_s``; ``ConnectError`` names the resource."""
        if self._link is not None:
            return
        kwargs: dict[str, Any] = {"open_timeout": max(1, int(self.connect_timeout_s * 1000))}
        if self.is_serial:
            kwargs.update(visa_serial_kwargs(self.serial))
        else:
            self._resolve_host()
        try:
            resource = open_session(self.resource, **kwargs)
        except OpenFailed as exc:
            raise ConnectError(f"instrument {self.resource}: cannot open: {exc}") from None
        try:
            self._link = self._make_link(resource)
        except BaseException:
            _quiet_close(resource)
            raise
        self._resource = resource
        self._dirty = None
        self._io("open")

    def close(self) -> None:
        """Close the connection (idempotent, never raises for an already broken link)."""
        resource, self._resource, self._link = self._resource, None, None
        if resource is not None:
            _quiet_close(resource)
            self._io("close")

    def _io(self, what: str, data: bytes | None = None,
            block: tuple[bytes, int, bytes] | None = None) -> None:
        """Record an event in the I/O log, when one is open (``drivers.iolog``)."""
        sink = iolog.sink()
        if sink is not None:
            sink.event(self.resource, what, data, block)

    def _resolve_host(self) -> None:
        """Name lookup up front: clearer message, and pyvisa-py 0.8 leaks the socket here."""
        if self.host is None:
            return
        try:
            socket.getaddrinfo(self.host, self.port or 0, type=socket.SOCK_STREAM)
        except (OSError, UnicodeError) as exc:
            reason = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
            raise ConnectError(
                f"instrument {self.resource}: cannot open: unknown host {self.host!r} "
                f"({reason})"
            ) from None

    def _make_link(self, resource: Any) -> Link:
        resource.read_termination = None
        resource.write_termination = ""
        if self.kind in ("hislip", "vxi11"):
            return HislipLink(resource)
        if self.kind != "socket":
            return VisaLink(resource)
        problem = fast_socket_problem(resource) if self.fast_socket else "turned off"
        if problem is None:
            session = resource.visalib.sessions[resource.session]
            sock = session.interface
            self._check_connected(sock)
            sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
            pending = session._pending_buffer
            taken = bytes(pending)
            pending.clear()
            return SocketLink(sock, taken)
        if self.fast_socket and problem not in _WARNED:
            _WARNED.add(problem)
            LOG.warning("fast socket path off (%s); using pyvisa's public read/write "
                        "path, which is slower", problem)
        return VisaLink(resource, public=True)

    def _check_connected(self, sock: socket.socket) -> None:
        error = sock.getsockopt(socket.SOL_SOCKET, socket.SO_ERROR)
        if error:
            # pyvisa-py reports a refused connect as success; the socket knows better.
            raise ConnectError(f"instrument {self.resource}: cannot open: {os.strerror(error)}")

    # -- messages ------------------------------------------------------------------
    def write(self, command: str) -> None:
        """Send one program message (the write terminator is added)."""
        link = self._ready(command)
        message = command.encode("ascii") + self.write_termination
        self._io(">", message)
        try:
            link.send(message, Deadline(self.timeout_s))
        except LinkTimeout:
            raise self._send_timeout(command) from None
        except LinkClosed as exc:
            self._lost(command, exc)

    def _send_timeout(self, command: str) -> InstrumentTimeout:
        """The error for a message the instrument would not take in time."""
        self._dirty = "timeout"
        return InstrumentTimeout(
            f"instrument {self.resource}: could not send '{command}' within "
            f"{self.timeout_s:.3g} s (the instrument does not read)"
        )

    def read_line(self, command: str, timeout_s: float | None = None) -> str:
        """The next response message as text, terminator removed."""
        deadline = Deadline(self.timeout_s if timeout_s is None else timeout_s)
        raw = self._read_line(command, deadline)
        return raw.decode("ascii", "replace")

    def query(self, command: str, timeout_s: float | None = None) -> str:
        """Send ``command`` and return its one-line reply."""
        self.write(command)
        return self.read_line(command, timeout_s)

    def read_block(
        self,
        command: str,
        expected: int,
        into: memoryview | None = None,
        timeout_s: float | None = None,
        what: str = "",
    ) -> memoryview:
        """Read one IEEE 488.2 block reply of ``expected`` payload bytes.

        The payload lands in ``into`` when given (exactly ``expected`` bytes long) or in a
        new buffer. A wrong length, a truncated block or a non-block reply is a
        ``BlockError`` naming the command; the input is left in step for the next command.
        """
        deadline = Deadline(self.timeout_s if timeout_s is None else timeout_s)
        return self._read_block(command, expected, into, deadline, what)

    def query_block(
        self,
        command: str,
        expected: int,
        into: memoryview,
        timeout_s: float | None = None,
        what: str = "",
    ) -> memoryview:
        """``write(command)`` then ``read_block``, in one step on a socket (the sweep path)."""
        link = self._ready(command)
        if not isinstance(link, SocketLink):
            self.write(command)
            return self.read_block(command, expected, into, timeout_s, what)
        deadline = Deadline(self.timeout_s if timeout_s is None else timeout_s)
        header = self._headers.get(expected)
        if header is None:
            header = self._headers[expected] = encode_header(expected)
        message = command.encode("ascii") + self.write_termination
        self._io(">", message)
        try:
            if link.exchange_block(message, header, into, self.read_termination, deadline):
                self._io("<", block=(header, expected, self.read_termination))
                return into
        except LinkTimeout:
            raise self._send_timeout(command) from None
        except LinkClosed as exc:
            self._lost(command, exc)
        return self._read_block(command, expected, into, deadline, what)

    # -- recovery ------------------------------------------------------------------
    def clear_input(self) -> bytes:
        """Discard anything already received; returns the start of what was dropped."""
        link = self._require_open("clear input")
        try:
            said = link.discard_input()
            if said:
                self._io("drop", said)
            return said
        except LinkClosed as exc:
            if exc.said:  # e.g. a busy instrument that says so and hangs up
                self.close()
                raise ConnectError(
                    f"instrument {self.resource}: refused the connection: {quote(exc.said, 80)}"
                ) from None
            self._lost("clear input", exc)

    def resync(self, quiet_s: float = RESYNC_QUIET_S) -> None:
        """Get back in step after a timeout or a malformed reply.

        After a garbled reply: drop input until the line has been silent for ``quiet_s``.
        After a timeout the awaited reply may still come: wait for it (up to the I/O
        timeout) and drop it; if nothing comes, a socket is reconnected so that a reply
        arriving even later cannot be taken for the answer to the next command.
        """
        link = self._require_open("resynchronise")
        kind, self._dirty = self._dirty, None
        self._io(f"resync after a {kind or 'request'}")
        if link.resync_by_reconnect:  # framed protocol: a fresh session is the clean state
            self.close()
            self.open()
            return
        try:
            link.discard_input()
            if kind == "timeout":
                try:
                    link.read_exact(1, Deadline(self.timeout_s))
                except LinkTimeout:
                    if isinstance(link, SocketLink):
                        self._reopen()
                    return
            cap = Deadline(max(self.timeout_s, quiet_s))
            while not cap.expired():
                link.discard_input()
                try:
                    link.read_exact(1, Deadline(quiet_s))
                except LinkTimeout:
                    break
            link.discard_input()
        except LinkClosed as exc:
            self._lost("resynchronise", exc)

    def _reopen(self) -> None:
        """A fresh connection; retried while the instrument still serves the old one.

        An instrument that refuses a second client typically says so in one line and
        closes; one that accepts says nothing until asked.
        """
        deadline = Deadline(self.connect_timeout_s)
        said = b""
        while True:
            self.close()
            self.open()
            link = self._require_open("reconnect")
            try:
                said = link.read_exact(1, Deadline(REFUSAL_WAIT_S))
                said += link.read_until(self.read_termination[-1], Deadline(REFUSAL_WAIT_S), 4096)
                link.read_exact(1, Deadline(REFUSAL_WAIT_S))
            except LinkTimeout:
                link.discard_input()
                return  # quiet, or a stray line on a link that stays open
            except LinkClosed:
                pass  # refused
            if deadline.expired():
                self.close()
                reason = f"said {quote(said, 80)}" if said else "closed it at once"
                raise ConnectError(
                    f"instrument {self.resource}: refused a new connection ({reason})"
                )
            time.sleep(REFUSAL_WAIT_S)

    # -- internals -----------------------------------------------------------------
    def _require_open(self, command: str) -> Link:
        if self._link is None:
            raise ConnectionLost(f"instrument {self.resource}: not connected (sending '{command}')")
        return self._link

    def _ready(self, command: str) -> Link:
        self._require_open(command)
        if self._dirty:
            self.resync()  # may replace the link (reconnect)
        return self._require_open(command)

    def _read_line(self, command: str, deadline: Deadline) -> bytes:
        link = self._require_open(command)
        term = self.read_termination
        try:
            raw = link.read_until(term[-1], deadline, MAX_LINE)
        except LinkOverflow as exc:
            self._dirty = "timeout"  # the rest of the runaway reply is still coming
            raise ReplyError(
                f"instrument {self.resource}: '{command}' reply is longer than {MAX_LINE} bytes: "
                f"starts {quote(exc.partial)}"
            ) from None
        except LinkTimeout as exc:
            self._timed_out(command, deadline, exc)
        except LinkClosed as exc:
            self._lost(command, exc)
        self._io("<", raw)
        # Accept a lone LF where CR LF is expected (CR before LF is whitespace to 488.2).
        if raw.endswith(term):
            return raw[: -len(term)]
        return raw[:-1].rstrip(b"\r")

    def _timed_out(self, command: str, deadline: Deadline, exc: LinkTimeout) -> Any:
        self._dirty = "timeout"
        self._io(f"timeout after {deadline.seconds:.3g} s", exc.partial)
        got = (
            f"; {len(exc.partial)} bytes arrived: starts {quote(exc.partial)}"
            if exc.partial
            else ""
        )
        raise InstrumentTimeout(
            f"instrument {self.resource}: no complete reply to '{command}' within "
            f"{deadline.seconds:.3g} s{got}"
        ) from None

    def _lost(self, command: str, exc: LinkClosed) -> Any:
        self._io(f"lost ({exc.args[0]})")
        self.close()
        where = f"instrument {self.resource}: connection lost during '{command}'"
        raise ConnectionLost(f"{where}: {exc.args[0]}") from None


def _quiet_close(resource: Any) -> None:
    with contextlib.suppress(Exception):  # closing a broken link: nothing left to report
        resource.close()


__all__ = ["SerialSettings", "Transport", "describe", "resource_manager"]
