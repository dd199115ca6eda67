"""Atomic, never-overwriting file writes.

A capture is written to a temporary file in the destination folder, flushed and fsynced,
then hard-linked to its final name. ``os.link`` fails if the name exists, so two writers
can never clobber each other and a crash leaves either no file or a complete one (plus,
at worst, a hidden ``.tmp-`` file that ``sweep_stale_temps`` removes).
"""

from __future__ import annotations

import contextlib
import os
import re
import tempfile
from pathlib import Path

TEMP_PREFIX = ".tmp-"
_UNSAFE = re.compile(r"[^A-Za-z0-9._+-]+")


def fsync_dir(folder: Path) -> None:
    """Make a rename or link in ``folder`` durable (no-op where unsupported)."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def write_new(path: Path | str, data: bytes | str, *, unique: bool = True) -> Path:
    """Write ``data`` to a new file at ``path`` atomically and return the final path.

    If ``path`` exists and ``unique`` is true, ``-2``, ``-3``… is inserted before the
    suffix until a free name is found; if ``unique`` is false, ``FileExistsError`` is
    raised. An existing file is never replaced.
    """
    path = Path(path)
    folder = path.parent
    folder.mkdir(parents=True, exist_ok=True)
    payload = data.encode("ascii") if isinstance(data, str) else data
    fd, tmp_name = tempfile.mkstemp(prefix=TEMP_PREFIX, dir=folder)
    tmp = Path(tmp_name)
    try:
        _usual_mode(fd)
        with os.fdopen(fd, "wb") as fh:
            fh.write(payload)
            fh.flush()
            os.fsync(fh.fileno())
        final = _link_new(tmp, path, unique)
        fsync_dir(folder)
        return final
    finally:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()


def replace_atomic(path: Path | str, data: bytes | str) -> Path:
    """Atomically replace a small state file (status, cursors); never for captures."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    payload = data.encode("utf-8") if isinstance(data, str) else data
    fd, tmp_name = tempfile.mkstemp(prefix=TEMP_PREFIX, dir=path.parent)
    try:
        _usual_mode(fd)
        with os.fdopen(fd, "wb") as fh:
            fh.write(payload)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp_name, path)
        fsync_dir(path.parent)
    finally:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp_name)
    return path


def free_path(path: Path) -> Path:
    """``path`` if no file has that name, else the first free ``stem-N.suffix``."""
    candidate = path
    n = 2
    while candidate.exists():
        candidate = path.with_name(f"{path.stem}-{n}{path.suffix}")
        n += 1
    return candidate


def safe_component(text: str, *, max_len: int = 80) -> str:
    """Reduce arbitrary text to a file-name component that cannot leave its folder."""
    cleaned = _UNSAFE.sub("_", text).strip("._") or "_"
    return cleaned[:max_len]


def sweep_stale_temps(folder: Path | str) -> list[Path]:
    """Delete temporary files left by an interrupted write; return what was removed."""
    removed = []
    folder = Path(folder)
    if folder.is_dir():
        for tmp in folder.glob(TEMP_PREFIX + "*"):
            with contextlib.suppress(FileNotFoundError):
                tmp.unlink()
                removed.append(tmp)
    return removed


def _usual_mode(fd: int) -> None:
    """Give a temp file the mode a plain ``open()`` would (mkstemp makes it 0600), so
    captures can be read by other users as the umask allows; never world-writable."""
    os.fchmod(fd, 0o666 & ~_current_umask() & ~0o002)


def _current_umask() -> int:
    """The process umask, read without changing it where the OS allows (threads!)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    umask = os.umask(0o022)  # fallback: briefly set, then restore
    os.umask(umask)
    return umask


def _link_new(tmp: Path, path: Path, unique: bool) -> Path:
    candidate = path
    for n in range(2, 100_000):
        try:
            os.link(tmp, candidate)
            return candidate
        except FileExistsError:
            if not unique:
                raise
            candidate = path.with_name(f"{path.stem}-{n}{path.suffix}")
    raise FileExistsError(f"no free name next to {path}")
