"""Atomic, never-overwriting file writes.

A capture is written to a temporary file in the destination folder, flushed and fsynced,
then hard-linked to its final name. ``os.link`` fails if the name exists, so two writers
can never clobber each other and a crash leaves either no file or a complete one (plus,
at worst, a hidden ``.tmp-<pid>-`` file that ``sweep_stale_temps`` removes once that
process is gone).
"""

from __future__ import annotations

import contextlib
import os
import re
import tempfile
import time
from collections.abc import Callable, Iterable
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
    fd, tmp_name = tempfile.mkstemp(prefix=_temp_prefix(), dir=folder)
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
    fd, tmp_name = tempfile.mkstemp(prefix=_temp_prefix(), dir=path.parent)
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


def free_path(path: Path, companions: Callable[[Path], Iterable[Path]] | None = None) -> Path:
    """``path`` if no file has that name, else the first free ``stem-N.suffix``.

    ``companions(candidate)`` may name further files that go with a candidate (its
    summary, a raw copy): all of them must be free.
    """
    def taken(candidate: Path) -> bool:
        names = companions(candidate) if companions else (candidate,)
        return any(p.exists() for p in names)

    candidate = path
    n = 2
    while taken(candidate):
        candidate = path.with_name(f"{path.stem}-{n}{path.suffix}")
        n += 1
    return candidate


def safe_component(text: str, *, max_len: int = 80) -> str:
    """Reduce arbitrary text to a file-name component that cannot leave its folder."""
    cleaned = _UNSAFE.sub("_", text).strip("._") or "_"
    return cleaned[:max_len]


def sweep_stale_temps(folder: Path | str, *, min_age_s: float = 3600.0) -> list[Path]:
    """Delete temporary files whose writer is gone; return what was removed.

    Temp names carry the writer's process id (``.tmp-<pid>-...``), so the leftovers of a
    killed process are recognised at once while another live process's write in the same
    folder is left alone. A temp name without a readable pid is removed only when older
    than ``min_age_s``.
    """
    removed = []
    folder = Path(folder)
    if not folder.is_dir():
        return removed
    for tmp in folder.glob(TEMP_PREFIX + "*"):
        pid = _writer_pid(tmp.name)
        try:
            stale = (not _alive(pid)) if pid is not None else (
                time.time() - tmp.stat().st_mtime > min_age_s)
            if stale:
                tmp.unlink()
                removed.append(tmp)
        except FileNotFoundError:
            continue
    return removed


def _temp_prefix() -> str:
    return f"{TEMP_PREFIX}{os.getpid()}-"


def _writer_pid(name: str) -> int | None:
    head = name[len(TEMP_PREFIX):].split("-", 1)[0]
    return int(head) if head.isdigit() and head.isascii() else None


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True  # another user's live process
    return True


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
