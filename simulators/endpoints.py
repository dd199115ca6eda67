"""Where bytes meet the instrument: a TCP listener and a pseudo-terminal.

Each endpoint serves one client at a time. A second TCP client gets one line,
``-300,"Device busy;another client is connected"``, and is closed. The pty has no notion of
connections: its slave side stays open inside the simulator (so the device node survives
client reconnects) and whatever a client leaves unread stays in the line, as on a real
serial port. Messages end at LF (a CR before it is whitespace to the parser); definite
blocks and quoted strings may contain LF. A message longer than 1 MiB is discarded with
−363. If a new message arrives while a reply is still being sent (the client is not
reading), the rest of the reply is discarded and −410 queued (IEEE Std 488.2 §6.3.2.3).
When a TCP client disconnects in the middle of a query message, −420 is queued.

Wire faults (``simulators.faults``) act here: drop, stall, garbage and truncate replace or
cut the reply; on the pty a dropped link just loses the reply.
"""

from __future__ import annotations

import contextlib
import errno
import os
import random
import select
import socket
import threading
import time
import tty
from abc import ABC, abstractmethod
from typing import Any

from simulators.faults import REPLY_KINDS
from simulators.instrument import AnalyzerCore, LinkDown, Stopped
from simulators.scpi_parser import Interpreter, Outcome
from simulators.scpi_tree import CommandTree

MAX_MESSAGE = 1 << 20
SERIAL_WRITE_PATIENCE_S = 2.0
BUSY_TEXT = b'-300,"Device busy;another client is connected"'


class Session(ABC):
    """One client conversation over a readable/writable file descriptor."""

    name = "session"

    def __init__(self, core: AnalyzerCore, tree: CommandTree, terminator: bytes,
                 seed: int = 0) -> None:
        self.core = core
        self.terminator = terminator
        self.interp = Interpreter(tree, core.status, terminator, session=self)
        self.inbuf = bytearray()
        self.closed = False
        self._wake_r, self._wake_w = os.pipe()
        os.set_blocking(self._wake_r, False)
        self._rng = random.Random(seed)
        self._discard_until_lf = False

    # -- to implement per transport ------------------------------------------------
    @abstractmethod
    def fileno(self) -> int:
        """The descriptor to wait on."""

    @abstractmethod
    def _read(self) -> bytes | None:
        """Some bytes, b"" if none are ready, None at end of stream."""

    @abstractmethod
    def _write(self, data: memoryview) -> int:
        """Write what the link takes now; return the count."""

    @abstractmethod
    def drop_link(self) -> None:
        """Close the link (TCP) or forget the reply (serial)."""

    # -- main loop -----------------------------------------------------------------
    def wake(self) -> None:
        with contextlib.suppress(OSError):
            os.write(self._wake_w, b"x")

    def close(self) -> None:
        self.closed = True
        self.wake()

    def serve(self) -> None:
        try:
            while not self.closed and not self.core.stopping:
                message = self._next_message()
                if message is not None:
                    self._process(message)
                    continue
                ready, _, _ = select.select([self.fileno(), self._wake_r], [], [], 0.5)
                if self._wake_r in ready:
                    self._drain_wake()
                if self.fileno() in ready and not self._receive():
                    break
        except (Stopped, OSError):
            pass
        finally:
            self._finish()

    def _finish(self) -> None:
        for fd in (self._wake_r, self._wake_w):
            with contextlib.suppress(OSError):
                os.close(fd)

    def _drain_wake(self) -> None:
        with contextlib.suppress(OSError):
            while os.read(self._wake_r, 64):
                pass

    def _receive(self) -> bool:
        """Read what is there into the input buffer; False at end of stream."""
        data = self._read()
        if data is None:
            if b"?" in self.inbuf:
                self.core.status.push(-420, "connection closed inside a query message")
            return False
        if time.monotonic() < self.core.down_until:
            self.inbuf.clear()
            return True  # rebooting: input is lost
        if self._discard_until_lf:
            cut = data.find(b"\n")
            if cut < 0:
                return True
            data, self._discard_until_lf = data[cut + 1:], False
        self.inbuf += data
        end = self.inbuf.find(b"\n")
        if end > MAX_MESSAGE or (end < 0 and len(self.inbuf) > MAX_MESSAGE):
            self.core.status.push(-363, f"message longer than {MAX_MESSAGE} bytes discarded")
            if end < 0:
                self.inbuf.clear()
                self._discard_until_lf = True
            else:
                del self.inbuf[: end + 1]
        return True

    def _next_message(self) -> bytes | None:
        end = find_message_end(self.inbuf)
        if end is None:
            return None
        message = bytes(self.inbuf[:end])
        del self.inbuf[: end + 1]
        return message

    def _process(self, message: bytes) -> None:
        core = self.core
        try:
            with core.lock:
                if core.stopping:
                    raise Stopped
                core.apply_due()
                outcome = self.interp.execute(message)
        except LinkDown:
            self.drop_link()
            return
        if outcome.response is not None:
            self._deliver(outcome)

    def _deliver(self, outcome: Outcome) -> None:
        core = self.core
        event = "data" if outcome.data else "reply"
        fault = core.faults.take(event, self.name, (*REPLY_KINDS, "error", "reboot"),
                                 core.sweep_count)
        payload = outcome.response or b""
        if fault is None:
            self._send(payload)
            return
        kind, opts = fault.kind, fault.options
        if kind == "error":
            core.status.push_entry((int(opts["code"]), str(opts["text"])))
            self._send(payload)
        elif kind == "reboot":
            with core.lock:
                core.reboot(float(opts["down_s"]))
            self.drop_link()
        elif kind == "drop":
            self.drop_link()
        elif kind == "stall":
            self._pause(float(opts["seconds"]))
            self._send(payload)
        elif kind == "garbage":
            junk = bytes(self._rng.choice(_NOT_LF) for _ in range(int(opts["nbytes"])))
            self._send(junk + self.terminator)
        elif kind == "truncate":
            cut = max(1, int(len(payload) * float(opts["fraction"])))
            self._send_partial(payload[:cut])
            if opts["then"] == "close":
                self.drop_link()

    def _pause(self, seconds: float) -> None:
        end = time.monotonic() + seconds
        while not self.core.stopping and not self.closed:
            remaining = end - time.monotonic()
            if remaining <= 0:
                return
            select.select([self._wake_r], [], [], min(remaining, 0.25))
            self._drain_wake()

    def _send_partial(self, payload: bytes) -> None:
        """Send the start of a reply that will never be completed (truncate fault)."""
        self._send(payload)

    def _send(self, payload: bytes) -> bool:
        """Write the reply; a complete new message arriving first interrupts it (−410).

        True when every byte went out.
        """
        view = memoryview(payload)
        fd = self.fileno()
        last_progress = time.monotonic()
        while view and not self.closed and not self.core.stopping:
            try:
                sent = self._write(view)
            except BlockingIOError:
                sent = 0
            if sent:
                view = view[sent:]
                last_progress = time.monotonic()
                continue
            if self._patience() and time.monotonic() - last_progress > self._patience():
                return False  # nobody reads the line: the rest is lost
            readable, _, _ = select.select([fd, self._wake_r], [fd], [], 0.25)
            if fd in readable:
                if not self._receive():
                    self.closed = True
                    return False
                if find_message_end(self.inbuf) is not None:
                    self.core.status.push(-410, "new message before the reply was read")
                    return False
            if self._wake_r in readable:
                self._drain_wake()
        return not view

    def _patience(self) -> float:
        return 0.0


_NOT_LF = [b for b in range(256) if b != 0x0A]


def find_message_end(buf: bytearray) -> int | None:
    """Index of the LF that ends the first complete message in ``buf``, or None."""
    end = buf.find(b"\n")
    if end < 0:
        return None
    head = buf[:end]
    if b"#" not in head and b'"' not in head and b"'" not in head:
        return end
    i, n = 0, len(buf)
    while i < n:
        c = buf[i]
        if c == 0x0A:
            return i
        if c in (0x22, 0x27):  # a string protects '#' but not LF
            close = buf.find(bytes([c]), i + 1)
            lf = buf.find(b"\n", i + 1)
            if close < 0 or (0 <= lf < close):
                return lf if lf >= 0 else None
            i = close + 1
            continue
        if c == 0x23 and i + 1 < n and 0x31 <= buf[i + 1] <= 0x39:
            digits = buf[i + 1] - 0x30
            length = bytes(buf[i + 2: i + 2 + digits])
            if len(length) < digits:
                return None
            if not length.isdigit():
                i += 2
                continue
            i += 2 + digits + int(length)
            continue
        i += 1
    return None


class TcpSession(Session):
    name = "tcp"

    def __init__(self, conn: socket.socket, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self.conn = conn
        conn.setblocking(False)
        conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)

    def fileno(self) -> int:
        return self.conn.fileno()

    def _read(self) -> bytes | None:
        try:
            data = self.conn.recv(65536)
        except BlockingIOError:
            return b""
        except ConnectionError:
            return None
        return data or None

    def _write(self, data: memoryview) -> int:
        try:
            return self.conn.send(data)
        except BlockingIOError:
            return 0
        except (BrokenPipeError, ConnectionError):
            self.closed = True
            return 0

    def drop_link(self) -> None:
        self.closed = True
        with contextlib.suppress(OSError):
            self.conn.shutdown(socket.SHUT_RDWR)
        self.wake()

    def _finish(self) -> None:
        with contextlib.suppress(OSError):
            self.conn.close()
        super()._finish()


class SerialSession(Session):
    name = "serial"

    def __init__(self, master: int, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self.master = master

    def fileno(self) -> int:
        return self.master

    def _read(self) -> bytes | None:
        try:
            return os.read(self.master, 65536)
        except BlockingIOError:
            return b""
        except OSError as exc:
            if exc.errno == errno.EIO:  # no slave open right now; we keep ours, so rare
                time.sleep(0.05)
                return b""
            raise

    def _write(self, data: memoryview) -> int:
        try:
            return os.write(self.master, data)
        except BlockingIOError:
            return 0

    def drop_link(self) -> None:
        """A serial line cannot be closed by the far end: the reply is simply lost."""
        self.wake()

    def _patience(self) -> float:
        return SERIAL_WRITE_PATIENCE_S


class TcpEndpoint:
    """Listens on 127.0.0.1; one session at a time; refuses connections while rebooting."""

    def __init__(self, core: AnalyzerCore, tree: CommandTree, terminator: bytes,
                 port: int = 0, host: str = "127.0.0.1", seed: int = 0) -> None:
        self.core, self.tree, self.terminator = core, tree, terminator
        self.host, self.seed = host, seed
        self._listener: socket.socket | None = self._listen(port)
        self.port = self._listener.getsockname()[1]
        self.session: TcpSession | None = None
        self._session_thread: threading.Thread | None = None
        self._thread = threading.Thread(target=self._accept_loop, name="sim-tcp", daemon=True)
        self._wake_r, self._wake_w = os.pipe()
        self._stopping = False

    @property
    def resource(self) -> str:
        return f"TCPIP::{self.host}::{self.port}::SOCKET"

    def _listen(self, port: int) -> socket.socket:
        sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            sock.bind((self.host, port))
        except OSError:
            sock.close()
            raise
        sock.listen(4)
        return sock

    def start(self) -> None:
        self._thread.start()

    def _accept_loop(self) -> None:
        while not self._stopping:
            if time.monotonic() < self.core.down_until:
                self._close_listener()
                time.sleep(0.02)
                continue
            if self._listener is None:
                try:
                    self._listener = self._listen(self.port)
                except OSError:
                    time.sleep(0.1)
                    continue
            ready, _, _ = select.select([self._listener, self._wake_r], [], [], 0.2)
            if self._listener not in ready or self._stopping:
                continue
            try:
                conn, _ = self._listener.accept()
            except OSError:
                continue
            self._on_connection(conn)
        self._close_listener()

    def _on_connection(self, conn: socket.socket) -> None:
        """Serve a new client, or refuse it while another one is served."""
        if self._session_thread is not None and self._session_thread.is_alive():
            threading.Thread(target=_refuse, args=(conn, BUSY_TEXT + self.terminator),
                             name="sim-refuse", daemon=True).start()
            return
        self.session = TcpSession(conn, self.core, self.tree, self.terminator, self.seed)
        self._session_thread = threading.Thread(target=self.session.serve,
                                                name="sim-tcp-session", daemon=True)
        self._session_thread.start()

    def _close_listener(self) -> None:
        if self._listener is not None:
            self._listener.close()
            self._listener = None

    def on_reboot(self) -> None:
        if self.session is not None:
            self.session.drop_link()

    def stop(self) -> None:
        self._stopping = True
        with contextlib.suppress(OSError):
            os.write(self._wake_w, b"x")
        if self.session is not None:
            self.session.drop_link()
        for thread in (self._thread, self._session_thread):
            if thread is not None and thread.is_alive():
                thread.join(timeout=3.0)
        for fd in (self._wake_r, self._wake_w):
            with contextlib.suppress(OSError):
                os.close(fd)


def _refuse(conn: socket.socket, text: bytes) -> None:
    """Send the busy line, then close gently (FIN, not RST) so the client can read it."""
    try:
        conn.settimeout(1.0)
        conn.sendall(text)
        conn.shutdown(socket.SHUT_WR)
        end = time.monotonic() + 1.0
        while time.monotonic() < end and conn.recv(4096):
            pass  # swallow what the client sent; closing with unread data would reset
    except OSError:
        pass
    finally:
        conn.close()


class SerialEndpoint:
    """A pseudo-terminal in raw mode; the resource is ``ASRL/dev/pts/N::INSTR``."""

    def __init__(self, core: AnalyzerCore, tree: CommandTree, terminator: bytes,
                 seed: int = 0) -> None:
        import pty

        self.master, self.slave = pty.openpty()
        tty.setraw(self.slave)
        os.set_blocking(self.master, False)
        self.device = os.ttyname(self.slave)
        self.session = SerialSession(self.master, core, tree, terminator, seed)
        self._thread = threading.Thread(target=self.session.serve, name="sim-serial",
                                        daemon=True)

    @property
    def resource(self) -> str:
        return f"ASRL{self.device}::INSTR"

    def start(self) -> None:
        self._thread.start()

    def on_reboot(self) -> None:
        """Input is ignored while down (see ``Session._receive``)."""

    def stop(self) -> None:
        self.session.close()
        self._thread.join(timeout=3.0)
        for fd in (self.master, self.slave):
            with contextlib.suppress(OSError):
                os.close(fd)

