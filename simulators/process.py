"""Run the simulator as a separate process and learn its endpoints.

Used by the demo and by tests that need the instrument to outlive (or die apart from)
the process under test. The child prints one resource string per endpoint and then a
``control HOST:PORT`` line; this waits for those lines with a deadline.
"""

from __future__ import annotations

import os
import selectors
import signal
import subprocess
import sys
import time
from collections.abc import Sequence

from simulators.errors import SimError


class SimProcess:
    """``python -m simulators ARGS`` as a child; use as a context manager."""

    def __init__(self, args: Sequence[str] = (), *, start_timeout_s: float = 20.0) -> None:
        self.args = list(args)
        self.start_timeout_s = start_timeout_s
        self.proc: subprocess.Popen[bytes] | None = None
        self.resources: list[str] = []
        self.control: tuple[str, int] | None = None

    @property
    def tcp_resource(self) -> str | None:
        return next((r for r in self.resources if r.upper().endswith("::SOCKET")), None)

    @property
    def vxi11_resource(self) -> str | None:
        return next((r for r in self.resources if "," in r and "::HISLIP" not in r.upper()),
                    None)

    @property
    def hislip_resource(self) -> str | None:
        return next((r for r in self.resources if "::HISLIP" in r.upper()), None)

    @property
    def serial_resource(self) -> str | None:
        return next((r for r in self.resources if r.upper().startswith("ASRL")), None)

    @property
    def control_text(self) -> str:
        if self.control is None:
            raise SimError("simulator has no control channel")
        return f"{self.control[0]}:{self.control[1]}"

    def start(self) -> SimProcess:
        env = dict(os.environ, PYTHONUNBUFFERED="1")
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "simulators", *self.args],
            stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env,
        )
        deadline = time.monotonic() + self.start_timeout_s
        pending = b""
        fd = self.proc.stdout.fileno()
        with selectors.DefaultSelector() as sel:
            sel.register(fd, selectors.EVENT_READ)
            while self.control is None:
                left = deadline - time.monotonic()
                if left <= 0 or not sel.select(left):
                    self.stop()
                    raise SimError("simulator did not report its endpoints in time")
                chunk = os.read(fd, 4096)
                if not chunk:
                    err = self.proc.stderr.read().decode(errors="replace").strip().splitlines()
                    self.stop()
                    raise SimError(f"simulator exited: {err[-1] if err else 'no message'}")
                pending += chunk
                *lines, pending = pending.split(b"\n")
                for raw in lines:
                    self._take_line(raw.decode("ascii", "replace").strip())
        return self

    def _take_line(self, line: str) -> None:
        if line.startswith("control "):
            host, port = line.split()[1].rsplit(":", 1)
            self.control = (host, int(port))
        elif line:
            self.resources.append(line)

    def stop(self) -> None:
        """SIGTERM, then SIGKILL after a grace period."""
        if self.proc is None or self.proc.poll() is not None:
            return
        self.proc.send_signal(signal.SIGTERM)
        try:
            self.proc.wait(timeout=5)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait(timeout=5)
        for stream in (self.proc.stdout, self.proc.stderr):
            if stream is not None:
                stream.close()

    def __enter__(self) -> SimProcess:
        return self.start()

    def __exit__(self, *exc: object) -> None:
        self.stop()
