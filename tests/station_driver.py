"""Test tooling: ``sweepd station`` driven the way an operator does, on a pipe or on a
pseudo-terminal (a real terminal interface, as over ssh), with signals and end of input.

The demo's ``Operator`` (pipe only) does the reading and prompt matching; this adds what
only tests need: the pseudo-terminal, Ctrl-D, signals, and waiting for any text.
"""

from __future__ import annotations

import contextlib
import os
import signal
import subprocess
import time
from collections.abc import Sequence
from typing import TextIO

from acquire.demo.operator import Operator
from acquire.station.errors import StationError


class StationProcess(Operator):
    """A station subprocess with a pipe or pseudo-terminal for its terminal."""

    def __init__(self, args: Sequence[str], *, pty: bool = False, echo: TextIO | None = None,
                 env: dict[str, str] | None = None, cwd: str | None = None) -> None:
        super().__init__(args, echo=echo, env=env, cwd=cwd)
        self.use_pty = pty

    def start(self) -> StationProcess:
        if not self.use_pty:
            super().start()
            return self
        master, slave = os.openpty()
        self.proc = subprocess.Popen(self.argv, stdin=slave, stdout=slave, stderr=slave,
                                     env=self.env, cwd=self.cwd, start_new_session=True)
        os.close(slave)
        self._fd = self._write_fd = master
        return self

    def _close_streams(self) -> None:
        if not self.use_pty:
            super()._close_streams()
            return
        with contextlib.suppress(OSError):
            os.close(self._fd)

    def close_input(self) -> None:
        """End of input (a pipe is closed; a terminal gets Ctrl-D at the start of a line)."""
        if self.use_pty:
            os.write(self._write_fd, b"\x04")
        else:
            self.proc.stdin.close()

    def signal(self, signum: int = signal.SIGINT) -> None:
        self.proc.send_signal(signum)

    def until(self, text: str, timeout_s: float = 30.0) -> str:
        """Wait until ``text`` appears in the output since the last ``expect``."""
        deadline = time.monotonic() + timeout_s
        while text not in self._pending:
            left = deadline - time.monotonic()
            if left <= 0 or not self._read(left):
                raise StationError(f"station output lacks {text!r}; last output: "
                                   f"{self._pending[-600:]!r}")
        return self._pending
