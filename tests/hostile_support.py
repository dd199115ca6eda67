"""Run the real ``sweepd`` entry point in a subprocess under a memory cap and a timeout.

Used by the hostile-file and fuzz tests: whatever the input, the process must end in
time, within its memory (``resource.RLIMIT_AS``), with exit 2 and one line on stderr.
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


@dataclass(frozen=True)
class Outcome:
    returncode: int | None  # None: killed by the timeout
    stdout: str
    stderr: str


def _cap(memory_mb: int):
    def apply() -> None:
        limit = memory_mb * 1024 * 1024
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    return apply


def run_limited(argv: list[str], *, memory_mb: int = 768, timeout: float = 60.0,
                code: str | None = None) -> Outcome:
    """``sweepd ARGV`` (or ``python -c CODE ARGV``) under the caps; never raises on a hang."""
    command = [sys.executable, "-c", code or "import sys; from acquire.cli import main; "
                                            "sys.exit(main(sys.argv[1:]))", *argv]
    env = {**os.environ, "PYTHONPATH": str(ROOT), "OPENBLAS_NUM_THREADS": "1",
           "PYTHONWARNINGS": "default"}
    try:
        done = subprocess.run(command, capture_output=True, text=True, timeout=timeout,
                              preexec_fn=_cap(memory_mb), env=env, cwd=ROOT, check=False)
    except subprocess.TimeoutExpired as exc:
        return Outcome(None, _text(exc.stdout), _text(exc.stderr))
    return Outcome(done.returncode, done.stdout, done.stderr)


def _text(data: bytes | str | None) -> str:
    if isinstance(data, bytes):
        return data.decode("utf-8", "replace")
    return data or ""
