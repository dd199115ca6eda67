#!/usr/bin/env python3
"""Set up and run sweepd from a fresh checkout with nothing but python3.

    python3 dev.py demo      # build .venv if needed, then run the demo against the simulator
    python3 dev.py test      # build .venv if needed, then run the test suite
    python3 dev.py lint      # ruff over the tree
    python3 dev.py sweepd …  # any sweepd command inside the environment

The virtual environment lives in .venv next to this file and is rebuilt when
pyproject.toml changes.
"""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
import venv
from pathlib import Path

HERE = Path(__file__).resolve().parent
VENV = HERE / ".venv"
BIN = VENV / ("Scripts" if os.name == "nt" else "bin")
STAMP = VENV / ".sweepd-installed"


def ensure_env() -> None:
    """Create .venv and install sweepd with its test extras, once per pyproject change."""
    want = hashlib.sha256(b"".join((HERE / name).read_bytes()
                                  for name in ("pyproject.toml", "setup.py"))).hexdigest()
    if STAMP.exists() and STAMP.read_text().strip() == want:
        return
    if not (BIN / "python").exists():
        print("dev.py: creating .venv", file=sys.stderr)
        venv.EnvBuilder(with_pip=True).create(VENV)
    print("dev.py: installing sweepd and its test tools into .venv", file=sys.stderr)
    pip = [str(BIN / "python"), "-m", "pip", "install", "--quiet", "--disable-pip-version-check"]
    subprocess.run([*pip, "-e", f"{HERE}[test,lint]"], check=True)
    STAMP.write_text(want + "\n")


def main(argv: list[str]) -> int:
    if not argv or argv[0] in {"-h", "--help", "help"}:
        print(__doc__)
        return 0
    ensure_env()
    what, rest = argv[0], argv[1:]
    if what == "test":
        cmd = [str(BIN / "python"), "-m", "pytest", *rest]
    elif what == "lint":
        cmd = [str(BIN / "ruff"), "check", str(HERE), *rest]
    elif what == "demo":
        cmd = [str(BIN / "sweepd"), "demo", *rest]
    elif what == "sweepd":
        cmd = [str(BIN / "sweepd"), *rest]
    else:
        print(f"dev.py: unknown action {what!r} (demo, test, lint, sweepd)", file=sys.stderr)
        return 2
    return subprocess.run(cmd, cwd=HERE).returncode


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
