"""Links through pyvisa-py sessions: serial, VXI-11, USB-TMC, HiSLIP, and the public-API
fallback for a raw socket (see ``drivers.links`` for the shared exceptions and the
raw-socket fast path)."""

from __future__ import annotations

import struct
from typing import Any

from drivers.deadline import Deadline
from drivers.links import RECV_CHUNK, LinkClosed, LinkOverflow, LinkTimeout, one_line, os_text

DRAIN_S = 0.05  # the longest the public path spends dropping input that is waiting


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
        self._public = public
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
            raise LinkClosed(one_line(exc)) from None
        except OSError as exc:  # pyserial reports a vanished port as SerialException(OSError)
            raise LinkClosed(os_text(exc)) from None

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
        if self._public:
            return self._drain()
        try:
            self._lib.flush(self._session, self._c.BufferOperation.discard_read_buffer)
        except OSError as exc:
            raise LinkClosed(os_text(exc)) from None
        return b""

    def _drain(self) -> bytes:
        """Read what is waiting, briefly (pyvisa-py's socket flush spins forever on a peer
        that has closed, so the public path drains by short reads instead)."""
        self._terminator(None)
        said = b""
        overall = Deadline(DRAIN_S)
        while not overall.expired():
            try:
                said = (said + self._read(RECV_CHUNK, Deadline(0.002), b""))[:256]
            except LinkTimeout:
                break
        return said

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
            raise LinkClosed(one_line(exc)) from None
        except OSError as exc:  # pyserial reports a vanished port as SerialException(OSError)
            raise LinkClosed(os_text(exc)) from None
        if status == status_code.error_timeout:
            raise LinkTimeout(partial + bytes(data))
        if status < 0:
            raise LinkClosed(f"VISA status {getattr(status, 'name', status)}")
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
    """HiSLIP (and VXI-11) through pyvisa-py's clients; see the module docstring.

    Both protocols frame messages (DataEnd; the END flag), so no termination character is
    involved and a fresh session is the clean state after a fault.
    """

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
            text = one_line(exc)
            if "dropped" in text.lower():
                raise LinkClosed("the instrument closed the connection") from None
            raise LinkClosed(f"HiSLIP protocol error: {text}") from None
