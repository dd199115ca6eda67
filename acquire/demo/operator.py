"""A program standing in for the station operator: ``sweepd station`` in its own process
with its terminal on a pipe. ``expect`` waits until the station shows one of its prompts
(``serial> ``, ``golden> ``, ...) and returns what it printed since; ``send`` types a
line and Enter; ``wait`` reads until the station exits. Nothing is simulated here: the
station reads real bytes and talks to the simulator over TCP.
"""

from __future__ import annotations

import codecs
import contextlib
import os
import re
import selectors
import subprocess
import sys
import time
from collections.abc import Sequence
from typing import TextIO

from acquire.station.errors import StationError

PROMPTS = ("serial> ", "golden> ", "stopped> ", "cal> ", "instrument> ", "station id> ", "> ")
ANSI = re.compile(r"\x1b\[[0-9;]*m")


class Operator:
    """A station subprocess whose terminal is a pipe, driven line by line."""

    def __init__(self, args: Sequence[str], *, echo: TextIO | None = None,
                 env: dict[str, str] | None = None, cwd: str | None = None) -> None:
        self.args = list(args)
        self.echo = echo
        self.env = dict(os.environ if env is None else env, PYTHONUNBUFFERED="1")
        self.cwd = cwd
        self.proc: subprocess.Popen[bytes] | None = None
        self.transcript = ""  # everything read, colour codes removed
        self.raw = b""  # everything read, as it came
        self._decoder = codecs.getincrementaldecoder("utf-8")("replace")
        self._pending = ""
        self._fd = -1
        self._write_fd = -1

    @property
    def argv(self) -> list[str]:
        return [sys.executable, "-m", "acquire.cli", "station", *self.args]

    def start(self) -> Operator:
        self.proc = subprocess.Popen(self.argv, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                     stderr=subprocess.STDOUT, env=self.env, cwd=self.cwd,
                                     start_new_session=True)
        self._fd = self.proc.stdout.fileno()
        self._write_fd = self.proc.stdin.fileno()
        return self

    def __enter__(self) -> Operator:
        return self if self.proc is not None else self.start()

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        """End the process if it still runs (SIGTERM, then SIGKILL) and close the streams."""
        if self.proc is None:
            return
        if self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=5)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait(timeout=5)
        self.drain()
        self._close_streams()
        self.proc = None

    def _close_streams(self) -> None:
        for stream in (self.proc.stdin, self.proc.stdout):
            with contextlib.suppress(OSError):
                stream.close()

    def send(self, line: str | bytes) -> None:
        """Type ``line`` and Enter (bytes are sent as they are, plus the line end)."""
        data = line if isinstance(line, bytes) else line.encode("utf-8", "surrogateescape")
        os.write(self._write_fd, data + b"\n")

    def expect(self, *prompts: str, timeout_s: float = 30.0) -> str:
        """Wait for one of ``prompts`` (default: any station prompt) at the end of the
        output; return the output since the last ``expect`` (colour codes removed)."""
        prompts = prompts or PROMPTS
        deadline = time.monotonic() + timeout_s
        while not any(self._pending.endswith(p) for p in prompts):
            left = deadline - time.monotonic()
            if left <= 0 or not self._read(left):
                tail = self._pending[-600:]
                state = "exited" if self.proc.poll() is not None else "is still running"
                raise StationError(f"station {state}; expected one of {list(prompts)}; last "
                                   f"output: {tail!r}")
        text, self._pending = self._pending, ""
        return text

    def wait(self, timeout_s: float = 30.0) -> int:
        """Wait for the station to exit (reading its output meanwhile); its exit status."""
        deadline = time.monotonic() + timeout_s
        while self.proc.poll() is None and time.monotonic() < deadline:
            self._read(min(0.2, max(deadline - time.monotonic(), 0.01)))
        if self.proc.poll() is None:
            raise StationError(f"station did not exit within {timeout_s:g} s")
        self.drain()
        return int(self.proc.returncode)

    def drain(self) -> str:
        """Read whatever output is left; return the output since the last ``expect``."""
        while self._read(0.05):
            pass
        return self._pending

    def _read(self, timeout_s: float) -> bool:
        with selectors.DefaultSelector() as sel:
            try:
                sel.register(self._fd, selectors.EVENT_READ)
            except (ValueError, OSError):
                return False
            if not sel.select(timeout_s):
                return False
        try:
            chunk = os.read(self._fd, 65536)
        except OSError:  # a pseudo-terminal whose other side has gone away
            return False
        if not chunk:
            return False
        self.raw += chunk
        text = ANSI.sub("", self._decoder.decode(chunk).replace("\r\n", "\n"))
        self.transcript += text
        self._pending += text
        if self.echo is not None:
            self.echo.write(text)
            self.echo.flush()
        return True
