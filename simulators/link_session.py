"""One client's conversation with the simulated instrument, whatever carries the bytes.

``Session`` reads messages (ending at LF outside blocks and quoted strings, see
``find_message_end``), runs them through the interpreter, and sends the replies with the
wire faults of ``simulators.faults`` applied; ``simulators.endpoints`` gives it a TCP
socket or a pseudo-terminal, ``simulators.hislip`` a HiSLIP channel pair.
"""

from __future__ import annotations

import contextlib
import os
import random
import select
import time
from abc import ABC, abstractmethod

from simulators.faults import REPLY_KINDS
from simulators.instrument import AnalyzerCore, LinkDown, Stopped
from simulators.scpi_parser import Interpreter, Outcome
from simulators.scpi_tree import CommandTree

MAX_MESSAGE = 1 << 20
SERIAL_WRITE_PATIENCE_S = 2.0  # a pty whose reader stalls: give up a reply after this


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
        outcome = execute_message(self.core, self.interp, message)
        if outcome is None:
            self.drop_link()
        elif outcome.response is not None:
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


def execute_message(core: AnalyzerCore, interp: Interpreter, message: bytes) -> Outcome | None:
    """Run one program message under the instrument's lock (due settings applied first);
    None when a fault took the link down meanwhile. ``Stopped`` once the simulator stops."""
    try:
        with core.lock:
            if core.stopping:
                raise Stopped
            core.apply_due()
            return interp.execute(message)
    except LinkDown:
        return None
