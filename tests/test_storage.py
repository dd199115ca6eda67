"""Atomic, never-overwriting writes and safe file-name components."""

from __future__ import annotations

import os
import subprocess
import sys
import threading
from pathlib import Path

import pytest

from acquire.storage import (
    TEMP_PREFIX,
    replace_atomic,
    safe_component,
    sweep_stale_temps,
    write_new,
)


def test_write_new_never_overwrites(tmp_path: Path) -> None:
    first = write_new(tmp_path / "unit.s1p", "one")
    second = write_new(tmp_path / "unit.s1p", "two")
    assert first.name == "unit.s1p" and second.name == "unit-2.s1p"
    assert first.read_text() == "one" and second.read_text() == "two"
    with pytest.raises(FileExistsError):
        write_new(tmp_path / "unit.s1p", "three", unique=False)
    assert first.read_text() == "one"
    assert not list(tmp_path.glob(TEMP_PREFIX + "*"))


def test_concurrent_writers_get_distinct_files(tmp_path: Path) -> None:
    paths: list[Path] = []
    lock = threading.Lock()

    def writer(i: int) -> None:
        p = write_new(tmp_path / "same.txt", f"writer {i}")
        with lock:
            paths.append(p)

    threads = [threading.Thread(target=writer, args=(i,)) for i in range(16)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert len({p.name for p in paths}) == 16
    assert sorted(p.read_text() for p in paths) == sorted(f"writer {i}" for i in range(16))


def test_replace_atomic_and_stale_temps(tmp_path: Path) -> None:
    state = tmp_path / "status.json"
    replace_atomic(state, "{}")
    replace_atomic(state, '{"a": 1}')
    assert state.read_text() == '{"a": 1}'
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True, check=True).stdout.strip()
    (tmp_path / f"{TEMP_PREFIX}{dead}-abc").write_text("half")      # writer was killed
    (tmp_path / f"{TEMP_PREFIX}{os.getpid()}-def").write_text("live")  # a write in flight
    old = tmp_path / f"{TEMP_PREFIX}legacy"
    old.write_text("?")
    os.utime(old, (0, 0))
    (tmp_path / f"{TEMP_PREFIX}fresh").write_text("?")
    removed = sweep_stale_temps(tmp_path)
    assert sorted(p.name for p in removed) == sorted([f"{TEMP_PREFIX}{dead}-abc",
                                                      f"{TEMP_PREFIX}legacy"])
    assert (tmp_path / f"{TEMP_PREFIX}{os.getpid()}-def").exists()


@pytest.mark.parametrize(
    "text",
    ["../../etc/passwd", "a/b", "..", ".", "", "x\x00y", "a\nb", "\\\\server\\share", "  ", "é"],
)
def test_safe_component_cannot_escape(tmp_path: Path, text: str) -> None:
    name = safe_component(text)
    assert name and "/" not in name and "\\" not in name and name not in {".", ".."}
    assert (tmp_path / name).resolve().parent == tmp_path.resolve()
    assert all(c.isalnum() or c in "._+-" for c in name)


def test_safe_component_limits_length() -> None:
    assert len(safe_component("A" * 500)) == 80


def test_write_new_cleans_temp_on_failure(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    def broken_link(src: str, dst: str) -> None:
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "link", broken_link)
    with pytest.raises(OSError):
        write_new(tmp_path / "x.s1p", "data")
    assert list(tmp_path.iterdir()) == []


def test_files_get_the_usual_mode_never_world_writable(tmp_path: Path) -> None:
    old = os.umask(0o022)
    try:
        path = write_new(tmp_path / "a.s1p", "x")
        state = replace_atomic(tmp_path / "s.json", "{}")
    finally:
        os.umask(old)
    assert path.stat().st_mode & 0o777 == 0o644
    assert state.stat().st_mode & 0o777 == 0o644
    old = os.umask(0)
    try:
        loose = write_new(tmp_path / "b.s1p", "x")
    finally:
        os.umask(old)
    assert loose.stat().st_mode & 0o777 == 0o664
