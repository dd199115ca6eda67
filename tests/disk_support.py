"""A small tmpfs for disk-full tests (mounting one is allowed as root here), and a way to
leave only so many bytes free on it. Tests skip, saying why, where mounting is not
permitted."""

from __future__ import annotations

import os
import shutil
import subprocess
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import pytest

SIZE = "2m"


@contextmanager
def small_disk(folder: Path) -> Iterator[Path]:
    """A 2 MiB tmpfs mounted on ``folder`` for the block; unmounted afterwards."""
    folder.mkdir(parents=True, exist_ok=True)
    if os.geteuid() != 0 or shutil.which("mount") is None:
        pytest.skip("disk-full test needs root to mount a small tmpfs")
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={SIZE},mode=0700", "tmpfs",
                           str(folder)], capture_output=True, text=True)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {done.stderr.strip()}")
    try:
        yield folder
    finally:
        subprocess.run(["umount", "-l", str(folder)], capture_output=True)


def leave_free(disk: Path, free: int) -> Path:
    """Fill ``disk`` so that about ``free`` bytes stay available; returns the filler."""
    filler = disk / "filler"
    filler.unlink(missing_ok=True)
    stat = os.statvfs(disk)
    filler.write_bytes(b"\0" * max(0, stat.f_bavail * stat.f_frsize - free))
    return filler
