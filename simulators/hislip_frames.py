"""HiSLIP (IVI-6.1) message framing for the simulator: header, codes, a stream cutter.

Every message is a 16-byte header ("HS", message type, control code, 32-bit message
parameter, 64-bit payload length; network byte order) and its payload. Codes from the
IVI-6.1 message type and error code tables.
"""

from __future__ import annotations

import socket
import struct
from dataclasses import dataclass

from simulators.link_session import MAX_MESSAGE

HEADER = struct.Struct("!2sBBIQ")
PROLOGUE = b"HS"
PROTOCOL_VERSION = 0x0100  # 1.0
VENDOR_ID = int.from_bytes(b"SW", "big")
SUB_ADDRESS = b"hislip0"
SERVER_MAX_MESSAGE = MAX_MESSAGE  # the largest message we accept (AsyncMaxMsgSizeResponse)
HANDSHAKE_TIMEOUT_S = 5.0

# Message types (IVI-6.1 section 6, message type table).
INITIALIZE, INITIALIZE_RESPONSE, FATAL_ERROR, ERROR = 0, 1, 2, 3
ASYNC_LOCK, ASYNC_LOCK_RESPONSE, DATA, DATA_END = 4, 5, 6, 7
DEVICE_CLEAR_COMPLETE, DEVICE_CLEAR_ACKNOWLEDGE = 8, 9
ASYNC_REMOTE_LOCAL_CONTROL, ASYNC_REMOTE_LOCAL_RESPONSE, TRIGGER = 10, 11, 12
ASYNC_MAX_MSG_SIZE, ASYNC_MAX_MSG_SIZE_RESPONSE = 15, 16
ASYNC_INITIALIZE, ASYNC_INITIALIZE_RESPONSE, ASYNC_DEVICE_CLEAR = 17, 18, 19
ASYNC_STATUS_QUERY, ASYNC_STATUS_RESPONSE, ASYNC_DEVICE_CLEAR_ACKNOWLEDGE = 21, 22, 23
ASYNC_LOCK_INFO, ASYNC_LOCK_INFO_RESPONSE = 24, 25

# FatalError and Error codes (IVI-6.1, error code tables).
FATAL_BAD_HEADER, FATAL_NO_BOTH_CHANNELS, FATAL_BAD_INIT, FATAL_TOO_MANY = 1, 2, 3, 4
ERROR_UNRECOGNIZED_TYPE, ERROR_TOO_LARGE = 1, 4
LOCK_FAILURE, LOCK_SUCCESS, LOCK_ERROR = 0, 1, 3


class ProtocolError(Exception):
    """A malformed header: answered with FatalError 1, then the channel closes."""


@dataclass
class Frame:
    kind: int
    control: int
    parameter: int
    payload: bytes


def pack(kind: int, control: int = 0, parameter: int = 0, payload: bytes = b"") -> bytes:
    """One HiSLIP message: header and payload."""
    return HEADER.pack(PROLOGUE, kind, control, parameter, len(payload)) + payload


class FrameReader:
    """Cuts a byte stream into frames; payloads larger than ``limit`` are skipped."""

    def __init__(self, limit: int = SERVER_MAX_MESSAGE) -> None:
        self.limit = limit
        self._buf = bytearray()
        self._skip = 0
        self.oversized = 0  # frames skipped for size since the last look

    def feed(self, data: bytes) -> list[Frame]:
        self._buf += data
        frames: list[Frame] = []
        while True:
            if self._skip:
                cut = min(self._skip, len(self._buf))
                del self._buf[:cut]
                self._skip -= cut
                if self._skip:
                    return frames
            if len(self._buf) < HEADER.size:
                return frames
            prologue, kind, control, parameter, length = HEADER.unpack_from(self._buf)
            if prologue != PROLOGUE:
                raise ProtocolError(f"bad prologue {bytes(self._buf[:2])!r}")
            if length > self.limit:
                del self._buf[: HEADER.size]
                self._skip = length
                self.oversized += 1
                continue
            if len(self._buf) < HEADER.size + length:
                return frames
            payload = bytes(self._buf[HEADER.size : HEADER.size + length])
            del self._buf[: HEADER.size + length]
            frames.append(Frame(kind, control, parameter, payload))


def read_frame(conn: socket.socket, timeout_s: float) -> Frame | None:
    """One whole frame from a blocking read (the handshake); None at end of stream."""
    conn.settimeout(timeout_s)
    reader = FrameReader()
    while True:
        chunk = conn.recv(65536)
        if not chunk:
            return None
        frames = reader.feed(chunk)
        if frames:
            return frames[0]
