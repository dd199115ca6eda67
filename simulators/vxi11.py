"""VXI-11 for the simulated analyzer: ``TCPIP::127.0.0.1,PORT::INSTR``.

VXI-11 (VXIbus Consortium, TCP/IP Instrument Protocol, rev. 1.0) is ONC RPC (RFC 5531)
over TCP with record marking (RFC 5531 section 11: a 4-byte header, top bit "last
fragment", 31-bit length). The core channel (program 0x0607AF, version 1) is served:
create_link (10), device_write (11), device_read (12), device_readstb (13),
device_trigger (14), device_clear (15), device_remote (16), device_local (17),
device_lock (18), device_unlock (19), destroy_link (23). enable_srq, docmd and the
interrupt channel get "operation not supported" (8); unknown procedures PROC_UNAVAIL.
There is no portmapper: clients give the port in the resource string (``host,port``),
which pyvisa-py's client supports. One link at a time.

device_write feeds the SCPI parser (the END flag ends a message); the reply waits for
device_read, which returns at most the requested count, with reason END on the last
piece, or error 15 (I/O timeout) when no reply comes within its io_timeout. Wire faults
act here too (endpoint name ``vxi11``): drop closes the link at the next read, stall
delays the reply (a read in the meantime times out), garbage replaces it, truncate
gives part of it without END and then closes or goes quiet.
"""

from __future__ import annotations

import contextlib
import random
import socket
import struct
import threading
import time
from typing import Any

from simulators.endpoints import TcpEndpoint
from simulators.instrument import Stopped
from simulators.link_session import execute_message, find_message_end
from simulators.scpi_parser import Interpreter

CORE_PROG, CORE_VERS = 0x0607AF, 1
MAX_RECV = 1 << 20
LAST_FRAGMENT = 0x80000000
# RPC (RFC 5531): message types, reply and accept status
CALL, REPLY, MSG_ACCEPTED = 0, 1, 0
SUCCESS, PROG_UNAVAIL, PROC_UNAVAIL, GARBAGE_ARGS = 0, 1, 3, 4
# VXI-11 error codes and read reasons
NO_ERROR, NOT_SUPPORTED, OUT_OF_RESOURCES, IO_TIMEOUT = 0, 8, 9, 15
REASON_REQCNT, REASON_CHR, REASON_END = 1, 2, 4
FLAG_END, FLAG_TERMCHAR = 8, 128
_NOT_LF = [b for b in range(256) if b != 0x0A]


class Xdr:
    """Reads XDR (RFC 4506) items from a call's arguments."""

    def __init__(self, data: bytes) -> None:
        self.data, self.pos = data, 0

    def uint(self) -> int:
        value = struct.unpack_from(">I", self.data, self.pos)[0]
        self.pos += 4
        return value

    def int(self) -> int:
        value = struct.unpack_from(">i", self.data, self.pos)[0]
        self.pos += 4
        return value

    def opaque(self) -> bytes:
        length = self.uint()
        value = self.data[self.pos : self.pos + length]
        if len(value) != length:
            raise struct.error("opaque runs past the end")
        self.pos += (length + 3) & ~3
        return value


def xdr_opaque(data: bytes) -> bytes:
    return struct.pack(">I", len(data)) + data + b"\0" * (-len(data) % 4)


class VxiLink:
    """One client connection: RPC records in, replies out (a thread per connection)."""

    name = "vxi11"

    def __init__(self, conn: socket.socket, endpoint: VxiEndpoint) -> None:
        self.conn, self.endpoint = conn, endpoint
        self.core = endpoint.core
        self.interp = Interpreter(endpoint.tree, self.core.status, endpoint.terminator,
                                  session=self)
        self.inbuf = bytearray()
        self.outbuf = bytearray()
        self.complete = True  # outbuf ends a message
        self.closed = False
        self.linked = False
        self._stall_until = 0.0
        self._drop_at_read = False
        self._close_after_read = False
        self._rng = random.Random(endpoint.seed)

    # -- the connection ------------------------------------------------------------------
    def serve(self) -> None:
        self.conn.settimeout(0.25)
        try:
            while not self.closed and not self.core.stopping:
                record = self._record()
                if record is None:
                    break
                reply = self._call(record)
                if reply is not None:
                    self._send_record(reply)
        except (OSError, Stopped, struct.error):
            pass
        finally:
            self.closed = True
            with contextlib.suppress(OSError):
                self.conn.close()

    def _record(self) -> bytes | None:
        data = bytearray()
        while True:
            head = self._exact(4)
            if head is None:
                return None
            (mark,) = struct.unpack(">I", head)
            part = self._exact(mark & ~LAST_FRAGMENT)
            if part is None:
                return None
            data += part
            if mark & LAST_FRAGMENT:
                return bytes(data)

    def _exact(self, count: int) -> bytes | None:
        out = bytearray()
        while len(out) < count:
            if self.closed or self.core.stopping:
                return None
            try:
                chunk = self.conn.recv(count - len(out))
            except TimeoutError:
                continue
            if not chunk:
                return None
            out += chunk
        return bytes(out)

    def _send_record(self, body: bytes) -> None:
        self.conn.sendall(struct.pack(">I", LAST_FRAGMENT | len(body)) + body)

    def drop_link(self) -> None:
        self.closed = True
        with contextlib.suppress(OSError):
            self.conn.shutdown(socket.SHUT_RDWR)

    # -- RPC -------------------------------------------------------------------------------
    def _call(self, record: bytes) -> bytes | None:
        x = Xdr(record)
        xid, kind, rpc_version = x.uint(), x.uint(), x.uint()
        prog, vers, proc = x.uint(), x.uint(), x.uint()
        for _ in range(2):  # credentials and verifier (AUTH_NONE expected; ignored)
            x.uint()
            x.opaque()
        head = struct.pack(">IIIIII", xid, REPLY, MSG_ACCEPTED, 0, 0, 0)
        if kind != CALL or rpc_version != 2:
            return None
        if (prog, vers) != (CORE_PROG, CORE_VERS):
            return head[:-4] + struct.pack(">I", PROG_UNAVAIL)
        handler = _PROCEDURES.get(proc)
        if handler is None:
            return head[:-4] + struct.pack(">I", PROC_UNAVAIL)
        try:
            body = handler(self, x)
        except struct.error:
            return head[:-4] + struct.pack(">I", GARBAGE_ARGS)
        return None if body is None else head + body

    def create_link(self, x: Xdr) -> bytes:
        x.int(), x.uint(), x.uint()  # client id, lock device, lock timeout
        x.opaque()  # device name (inst0): any is accepted
        if not self.endpoint.claim(self):
            return struct.pack(">iiII", OUT_OF_RESOURCES, 0, 0, 0)
        self.linked = True
        return struct.pack(">iiII", NO_ERROR, 1, 0, MAX_RECV)

    def device_write(self, x: Xdr) -> bytes:
        x.int(), x.uint(), x.uint()  # link, io timeout, lock timeout
        flags, data = x.int(), x.opaque()
        self.inbuf += data
        if flags & FLAG_END and not data.endswith(b"\n"):
            self.inbuf += b"\n"
        while (end := find_message_end(self.inbuf)) is not None:
            message = bytes(self.inbuf[:end])
            del self.inbuf[: end + 1]
            self._execute(message)
        return struct.pack(">iI", NO_ERROR, len(data))

    def device_read(self, x: Xdr) -> bytes | None:
        x.int()  # link
        request, io_timeout_s = x.uint(), x.uint() / 1000.0
        x.uint()
        flags, term = x.int(), x.int()
        if self._drop_at_read:
            self.drop_link()
            return None
        deadline = time.monotonic() + io_timeout_s
        wait = max(0.0, self._stall_until - time.monotonic())
        if not self.outbuf or wait > io_timeout_s:
            self._sleep(min(wait, io_timeout_s) if self.outbuf else io_timeout_s, deadline)
            return struct.pack(">ii", IO_TIMEOUT, 0) + xdr_opaque(b"")
        self._sleep(wait, deadline)
        count = min(request, len(self.outbuf))
        if flags & FLAG_TERMCHAR:
            cut = self.outbuf.find(bytes([term & 0xFF]), 0, count)
            count = cut + 1 if cut >= 0 else count
        data = bytes(self.outbuf[:count])
        del self.outbuf[:count]
        reason = REASON_REQCNT if count == request else 0
        if flags & FLAG_TERMCHAR and data.endswith(bytes([term & 0xFF])):
            reason |= REASON_CHR
        if not self.outbuf and self.complete:
            reason |= REASON_END
        if not self.outbuf and self._close_after_read:
            self._drop_at_read = True
        return struct.pack(">ii", NO_ERROR, reason) + xdr_opaque(data)

    def device_readstb(self, x: Xdr) -> bytes:
        return struct.pack(">iI", NO_ERROR, self.core.status.stb() & 0xFF)

    def device_trigger(self, x: Xdr) -> bytes:
        self._execute(b"*TRG")
        return struct.pack(">i", NO_ERROR)

    def device_clear(self, x: Xdr) -> bytes:
        self.inbuf.clear()
        self.outbuf.clear()
        self.complete, self._stall_until = True, 0.0
        return struct.pack(">i", NO_ERROR)

    def no_op(self, x: Xdr) -> bytes:
        return struct.pack(">i", NO_ERROR)

    def destroy_link(self, x: Xdr) -> bytes:
        self.linked = False
        self.endpoint.release(self)
        return struct.pack(">i", NO_ERROR)

    def not_supported(self, x: Xdr) -> bytes:
        return struct.pack(">i", NOT_SUPPORTED)

    # -- the instrument ------------------------------------------------------------------
    def _execute(self, message: bytes) -> None:
        outcome = execute_message(self.core, self.interp, message)
        if outcome is None:
            self._drop_at_read = True
        elif outcome.response is not None:
            self._deliver(outcome.response, outcome.data)

    def _deliver(self, payload: bytes, data: bool) -> None:
        """Queue a reply for device_read, through the armed wire faults."""
        core = self.core
        fault = core.faults.take("data" if data else "reply", self.name,
                                 ("drop", "stall", "garbage", "truncate", "error", "reboot"),
                                 core.sweep_count)
        kind = fault.kind if fault else None
        opts = fault.options if fault else {}
        if kind == "error":
            core.status.push_entry((int(opts["code"]), str(opts["text"])))
        elif kind == "reboot":
            with core.lock:
                core.reboot(float(opts["down_s"]))
            self._drop_at_read = True
            return
        elif kind == "drop":
            self._drop_at_read = True
            return
        elif kind == "stall":
            self._stall_until = time.monotonic() + float(opts["seconds"])
        elif kind == "garbage":
            payload = bytes(self._rng.choice(_NOT_LF) for _ in range(int(opts["nbytes"])))
            payload += self.interp.terminator
        elif kind == "truncate":
            payload = payload[: max(1, int(len(payload) * float(opts["fraction"])))]
            self.outbuf += payload
            self.complete = False
            self._close_after_read = opts["then"] == "close"
            return
        self.outbuf += payload
        self.complete = True

    def _sleep(self, seconds: float, deadline: float) -> None:
        end = min(time.monotonic() + seconds, deadline)
        while not self.closed and not self.core.stopping and time.monotonic() < end:
            time.sleep(min(0.05, max(0.0, end - time.monotonic())))


_PROCEDURES: dict[int, Any] = {
    10: VxiLink.create_link, 11: VxiLink.device_write, 12: VxiLink.device_read,
    13: VxiLink.device_readstb, 14: VxiLink.device_trigger, 15: VxiLink.device_clear,
    16: VxiLink.no_op, 17: VxiLink.no_op, 18: VxiLink.no_op, 19: VxiLink.no_op,
    23: VxiLink.destroy_link,
    # enable_srq, docmd and the interrupt channel: known procedures, not supported here
    20: VxiLink.not_supported, 22: VxiLink.not_supported, 25: VxiLink.not_supported,
    26: VxiLink.not_supported,
}


class VxiEndpoint(TcpEndpoint):
    """Listens on 127.0.0.1 for VXI-11 core-channel connections; one link at a time."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self._thread.name = "sim-vxi11"
        self._links: list[threading.Thread] = []
        self._owner: VxiLink | None = None
        self._claim_lock = threading.Lock()

    @property
    def resource(self) -> str:
        return f"TCPIP::{self.host},{self.port}::INSTR"

    def _on_connection(self, conn: socket.socket) -> None:
        link = VxiLink(conn, self)
        thread = threading.Thread(target=link.serve, name="sim-vxi11-link", daemon=True)
        self._links = [t for t in self._links if t.is_alive()] + [thread]
        thread.start()

    def claim(self, link: VxiLink) -> bool:
        with self._claim_lock:
            owner = self._owner
            if owner is not None and owner is not link and not owner.closed and owner.linked:
                return False
            self._owner = link
            self.session = link
            return True

    def release(self, link: VxiLink) -> None:
        with self._claim_lock:
            if self._owner is link:
                self._owner = None

    def stop(self) -> None:
        super().stop()
        for thread in self._links:
            thread.join(timeout=3.0)
