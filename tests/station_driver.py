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
import sys
import time
from collections.abc import Sequence
from pathlib import Path
from typing import TextIO

from acquire.demo.operator import Operator
from acquire.station.errors import StationError

# The station with its clock injected: ``acquire.utc`` reads the machine's clock plus the
# number of seconds written in a file the test owns, so a test moves time forward by
# writing that file instead of sleeping past a validity window.
SHIFTED_CLOCK_MAIN = """
import sys
from datetime import timedelta
from pathlib import Path

import acquire.utc as utc

shift = Path(sys.argv.pop(1))
utc.set_clock(lambda: utc.system_now() + timedelta(seconds=float(shift.read_text() or 0)))
from acquire.cli import main

sys.exit(main(sys.argv[1:]))
"""


class StationProcess(Operator):
    """A station subprocess with a pipe or pseudo-terminal for its terminal; with
    ``clock_shift_file`` its clock runs that many seconds ahead (see ``shift_clock``)."""

    def __init__(self, args: Sequence[str], *, pty: bool = False, echo: TextIO | None = None,
                 env: dict[str, str] | None = None, cwd: str | None = None,
                 clock_shift_file: Path | None = None) -> None:
        super().__init__(args, echo=echo, env=env, cwd=cwd)
        self.use_pty = pty
        self.clock_shift_file = clock_shift_file
        if clock_shift_file is not None and not clock_shift_file.exists():
            clock_shift_file.write_text("0")

    @property
    def argv(self) -> list[str]:
        if self.clock_shift_file is None:
            return super().argv
        return [sys.executable, "-c", SHIFTED_CLOCK_MAIN, str(self.clock_shift_file),
                "station", *self.args]

    def shift_clock(self, seconds: float) -> None:
        """From now on the station's clock runs ``seconds`` ahead of the machine's."""
        self.clock_shift_file.write_text(repr(float(seconds)))

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
