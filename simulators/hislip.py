"""HiSLIP (IVI-6.1) for the simulated analyzer: ``TCPIP::127.0.0.1::hislip0,PORT::INSTR``.

IVI-6.1 (High-Speed LAN Instrument Protocol, an open IVI Foundation standard) in the
synchronized mode: every message is a 16-byte header (``HS``, message type, control code,
32-bit parameter, 64-bit payload length, network byte order) and a payload.

- A client opens the synchronous channel with Initialize (its protocol version and vendor
  id in the parameter, the sub-address ``hislip0`` as payload) and gets InitializeResponse
  (our protocol version 1.0 and a new session id; control code 0: synchronized mode).
  It then opens the asynchronous channel with AsyncInitialize(session id) and gets
  AsyncInitializeResponse (our vendor id).
- Program messages arrive as Data/DataEnd carrying a message id; the parser sees their
  payloads as one byte stream, DataEnd ending a message (an LF is added if the client sent
  none). Each reply goes back as Data.../DataEnd with the id of the last DataEnd received,
  split to the client's maximum message size (AsyncMaxMsgSize).
- Device clear: AsyncDeviceClear on the async channel abandons the reply being sent and is
  acknowledged (AsyncDeviceClearAcknowledge, feature bits 0); the client's
  DeviceClearComplete on the sync channel then drops every input received before it and
  is answered with DeviceClearAcknowledge. Trigger runs as ``*TRG``.
- Async channel: AsyncMaxMsgSize, AsyncLock (request/release, one exclusive lock; there is
  only one client), AsyncLockInfo, AsyncStatusQuery (the status byte),
  AsyncRemoteLocalControl. Anything else gets Error "unrecognized message type".
- One client at a time: a second Initialize gets FatalError 4 (maximum number of clients
  exceeded) and is closed. A malformed header gets FatalError 1 and a close.

Wire faults act as on the raw socket (endpoint name ``hislip``): drop closes both
channels, stall delays the reply, garbage replies with junk in a DataEnd, truncate sends
part of the reply as Data (no DataEnd) and then closes or goes quiet.
"""

from __future__ import annotations

import contextlib
import itertools
import socket
import struct
import threading
import time
from typing import Any

from simulators.endpoints import TcpEndpoint
from simulators.hislip_frames import (
    ASYNC_DEVICE_CLEAR,
    ASYNC_DEVICE_CLEAR_ACKNOWLEDGE,
    ASYNC_INITIALIZE,
    ASYNC_INITIALIZE_RESPONSE,
    ASYNC_LOCK,
    ASYNC_LOCK_INFO,
    ASYNC_LOCK_INFO_RESPONSE,
    ASYNC_LOCK_RESPONSE,
    ASYNC_MAX_MSG_SIZE,
    ASYNC_MAX_MSG_SIZE_RESPONSE,
    ASYNC_REMOTE_LOCAL_CONTROL,
    ASYNC_REMOTE_LOCAL_RESPONSE,
    ASYNC_STATUS_QUERY,
    ASYNC_STATUS_RESPONSE,
    DATA,
    DATA_END,
    DEVICE_CLEAR_ACKNOWLEDGE,
    DEVICE_CLEAR_COMPLETE,
    ERROR,
    ERROR_TOO_LARGE,
    ERROR_UNRECOGNIZED_TYPE,
    FATAL_BAD_HEADER,
    FATAL_BAD_INIT,
    FATAL_ERROR,
    FATAL_TOO_MANY,
    HANDSHAKE_TIMEOUT_S,
    HEADER,
    INITIALIZE,
    INITIALIZE_RESPONSE,
    LOCK_ERROR,
    LOCK_SUCCESS,
    PROTOCOL_VERSION,
    SERVER_MAX_MESSAGE,
    SUB_ADDRESS,
    TRIGGER,
    VENDOR_ID,
    Frame,
    FrameReader,
    ProtocolError,
    pack,
    read_frame,
)
from simulators.instrument import AnalyzerCore
from simulators.link_session import Session
from simulators.scpi_tree import CommandTree


class HislipSession(Session):
    """The synchronous channel of one client (the async one is ``AsyncChannel``)."""

    name = "hislip"

    def __init__(self, conn: socket.socket, session_id: int, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self.conn = conn
        self.session_id = session_id
        conn.setblocking(False)
        conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        self.reader = FrameReader()
        self.message_id = 0xFFFF_FFFF
        self.client_max = 1 << 20  # until the client says (AsyncMaxMsgSize)
        self.async_conn: socket.socket | None = None
        self.abandon = False  # set by AsyncDeviceClear: stop sending the current reply
        self._control_lock = threading.RLock()
        self.finished = False

    def fileno(self) -> int:
        return self.conn.fileno()

    # -- receiving -------------------------------------------------------------------
    def _read(self) -> bytes | None:
        try:
            data = self.conn.recv(65536)
        except BlockingIOError:
            return b""
        except OSError:
            return None
        if not data:
            return None
        try:
            frames = self.reader.feed(data)
        except ProtocolError as exc:
            self._fatal(FATAL_BAD_HEADER, str(exc))
            return None
        if self.reader.oversized:
            self.reader.oversized = 0
            self.control(pack(ERROR, ERROR_TOO_LARGE, 0, b"message too large"))
        out = bytearray()
        for frame in frames:
            out = self._take(frame, out)
        return bytes(out)

    def _take(self, frame: Frame, out: bytearray) -> bytearray:
        """Apply one sync-channel frame; returns the program bytes collected so far."""
        if frame.kind in (DATA, DATA_END):
            self.message_id = frame.parameter
            out += frame.payload
            if frame.kind == DATA_END and not frame.payload.endswith(b"\n"):
                out += b"\n"
        elif frame.kind == TRIGGER:
            self.message_id = frame.parameter
            out += b"*TRG\n"
        elif frame.kind == DEVICE_CLEAR_COMPLETE:
            self.inbuf.clear()  # device clear: input received before it is dropped
            out = bytearray()
            self.abandon = False
            self.message_id = 0xFFFF_FFFF
            self.control(pack(DEVICE_CLEAR_ACKNOWLEDGE, 0))
        elif frame.kind in (ERROR, FATAL_ERROR):
            pass  # a client's error report needs no answer
        else:
            self.control(pack(ERROR, ERROR_UNRECOGNIZED_TYPE, 0,
                               f"unrecognized message type {frame.kind}".encode()))
        return out

    # -- sending ---------------------------------------------------------------------
    def _write(self, data: memoryview) -> int:
        if self.abandon:
            return len(data)  # device clear: the rest of the reply is not sent
        try:
            return self.conn.send(data)
        except BlockingIOError:
            return 0
        except OSError:
            self.closed = True
            return 0

    def _frames(self, payload: bytes, last: int) -> bytes:
        """``payload`` as Data messages of at most the client's size, ``last`` closing."""
        room = max(1, self.client_max - HEADER.size)
        parts = [payload[i : i + room] for i in range(0, len(payload), room)] or [b""]
        out = bytearray()
        for index, part in enumerate(parts):
            kind = last if index == len(parts) - 1 else DATA
            out += pack(kind, 0, self.message_id, part)
        return bytes(out)

    def _send(self, payload: bytes) -> bool:
        with self._control_lock:
            done = super()._send(self._frames(payload, DATA_END))
        if self.abandon:
            self.abandon = False
            return False
        if not done:
            self.drop_link()  # a reply cut inside a frame cannot be resumed
        return done

    def _send_partial(self, payload: bytes) -> None:
        with self._control_lock:
            super()._send(self._frames(payload, DATA))

    def control(self, message: bytes) -> None:
        """A protocol message on the sync channel (never inside a reply's frames)."""
        with self._control_lock, contextlib.suppress(OSError):
            self.conn.setblocking(True)
            self.conn.settimeout(2.0)
            try:
                self.conn.sendall(message)
            finally:
                self.conn.setblocking(False)

    def _fatal(self, code: int, text: str) -> None:
        self.control(pack(FATAL_ERROR, code, 0, text.encode("ascii", "replace")))

    # -- ending ----------------------------------------------------------------------
    def drop_link(self) -> None:
        self.closed = True
        for conn in (self.conn, self.async_conn):
            if conn is not None:
                with contextlib.suppress(OSError):
                    conn.shutdown(socket.SHUT_RDWR)
        self.wake()

    def _finish(self) -> None:
        self.finished = True
        for conn in (self.conn, self.async_conn):
            if conn is not None:
                with contextlib.suppress(OSError):
                    conn.close()
        super()._finish()


class AsyncChannel:
    """The asynchronous channel of a session: locks, status, device clear, sizes."""

    def __init__(self, conn: socket.socket, session: HislipSession) -> None:
        self.conn = conn
        self.session = session
        self.locked = False
        conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)

    def serve(self) -> None:
        reader = FrameReader(limit=4096)
        self.conn.settimeout(0.25)
        try:
            while not self.session.closed:
                try:
                    chunk = self.conn.recv(65536)
                except TimeoutError:
                    continue
                if not chunk:
                    break
                for frame in reader.feed(chunk):
                    self.conn.sendall(self._answer(frame))
        except ProtocolError as exc:
            with contextlib.suppress(OSError):
                self.conn.sendall(pack(FATAL_ERROR, FATAL_BAD_HEADER, 0, str(exc).encode()))
        except OSError:
            pass
        finally:
            self.session.drop_link()  # one channel gone: the session is over

    def _answer(self, frame: Frame) -> bytes:
        session = self.session
        kind = frame.kind
        if kind == ASYNC_MAX_MSG_SIZE and len(frame.payload) == 8:
            session.client_max = max(HEADER.size + 1, struct.unpack("!Q", frame.payload)[0])
            return pack(ASYNC_MAX_MSG_SIZE_RESPONSE, 0, 0, struct.pack("!Q", SERVER_MAX_MESSAGE))
        if kind == ASYNC_LOCK:
            return pack(ASYNC_LOCK_RESPONSE, self._lock(frame.control == 1))
        if kind == ASYNC_LOCK_INFO:
            return pack(ASYNC_LOCK_INFO_RESPONSE, int(self.locked), int(self.locked))
        if kind == ASYNC_STATUS_QUERY:
            return pack(ASYNC_STATUS_RESPONSE, session.core.status.stb() & 0xFF)
        if kind == ASYNC_DEVICE_CLEAR:
            session.abandon = True
            session.wake()
            return pack(ASYNC_DEVICE_CLEAR_ACKNOWLEDGE, 0)
        if kind == ASYNC_REMOTE_LOCAL_CONTROL:
            return pack(ASYNC_REMOTE_LOCAL_RESPONSE)
        return pack(ERROR, ERROR_UNRECOGNIZED_TYPE, 0,
                    f"unrecognized message type {kind}".encode())

    def _lock(self, request: bool) -> int:
        """Request or release the exclusive lock (a shared lock is taken as exclusive)."""
        if request:
            self.locked = True
            return LOCK_SUCCESS
        if not self.locked:
            return LOCK_ERROR
        self.locked = False
        return LOCK_SUCCESS


class HislipEndpoint(TcpEndpoint):
    """Listens on 127.0.0.1 for HiSLIP; one client (two connections) at a time."""

    def __init__(self, core: AnalyzerCore, tree: CommandTree, terminator: bytes,
                 port: int = 0, host: str = "127.0.0.1", seed: int = 0) -> None:
        super().__init__(core, tree, terminator, port, host, seed)
        self._thread.name = "sim-hislip"
        self._ids = itertools.count(1)
        self._threads: list[threading.Thread] = []
        self._claim = threading.Lock()

    @property
    def resource(self) -> str:
        return f"TCPIP::{self.host}::hislip0,{self.port}::INSTR"

    def _on_connection(self, conn: socket.socket) -> None:
        self._spawn(self._handshake, conn)

    def _spawn(self, target: Any, *args: Any) -> None:
        thread = threading.Thread(target=target, args=args, name="sim-hislip-conn", daemon=True)
        self._threads = [t for t in self._threads if t.is_alive()] + [thread]
        thread.start()

    def _handshake(self, conn: socket.socket) -> None:
        try:
            frame = read_frame(conn, HANDSHAKE_TIMEOUT_S)
            if frame is not None and frame.kind == INITIALIZE:
                self._initialize(conn, frame)
                return
            if frame is not None and frame.kind == ASYNC_INITIALIZE:
                self._async_initialize(conn, frame)
                return
            if frame is not None:
                _refuse(conn, FATAL_BAD_INIT, "first message must be Initialize or "
                        "AsyncInitialize")
                return
        except ProtocolError as exc:
            _refuse(conn, FATAL_BAD_HEADER, str(exc))
            return
        except OSError:
            pass
        conn.close()

    def _initialize(self, conn: socket.socket, frame: Frame) -> None:
        if frame.payload != SUB_ADDRESS:
            _refuse(conn, FATAL_BAD_INIT, f"unknown sub-address {frame.payload[:32]!r}; "
                    f"this instrument serves {SUB_ADDRESS.decode()}")
            return
        with self._claim:
            if not self._free():
                _refuse(conn, FATAL_TOO_MANY, "another client is connected")
                return
            session = HislipSession(conn, next(self._ids) & 0xFFFF, self.core, self.tree,
                                    self.terminator, self.seed)
            self.session = session
            thread = threading.Thread(target=session.serve, name="sim-hislip-session",
                                      daemon=True)
            self._session_thread = thread
            thread.start()
        session.control(pack(INITIALIZE_RESPONSE, 0,
                             (PROTOCOL_VERSION << 16) | session.session_id))

    def _free(self, wait_s: float = 1.0) -> bool:
        """No live session (a client that just closed gets a moment to be noticed)."""
        end = time.monotonic() + wait_s
        while isinstance(self.session, HislipSession) and not self.session.finished:
            if time.monotonic() > end:
                return False
            time.sleep(0.01)
        return True

    def _async_initialize(self, conn: socket.socket, frame: Frame) -> None:
        session = self.session
        if (not isinstance(session, HislipSession) or session.closed
                or session.session_id != frame.parameter or session.async_conn is not None):
            _refuse(conn, FATAL_BAD_INIT, f"no session {frame.parameter} waits for its "
                    "asynchronous channel")
            return
        session.async_conn = conn
        conn.sendall(pack(ASYNC_INITIALIZE_RESPONSE, 0, VENDOR_ID))
        AsyncChannel(conn, session).serve()

    def stop(self) -> None:
        super().stop()
        for thread in self._threads:
            thread.join(timeout=3.0)


def _refuse(conn: socket.socket, code: int, text: str) -> None:
    """FatalError, then a gentle close so the client can read it."""
    try:
        conn.settimeout(1.0)
        conn.sendall(pack(FATAL_ERROR, code, 0, text.encode("ascii", "replace")))
        conn.shutdown(socket.SHUT_WR)
        end = time.monotonic() + 1.0
        while time.monotonic() < end and conn.recv(4096):
            pass
    except OSError:
        pass
    finally:
        conn.close()
