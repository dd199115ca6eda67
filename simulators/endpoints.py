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
import select
import socket
import threading
import time
import tty
from typing import Any

from simulators.instrument import AnalyzerCore
from simulators.link_session import SERIAL_WRITE_PATIENCE_S, Session
from simulators.scpi_tree import CommandTree

BUSY_TEXT = b'-300,"Device busy;another client is connected"'


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

