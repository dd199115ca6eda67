"""Plans the service may run: files in one folder, named without a path.

A request names a plan (``patch-station``), never a path: the name must be a plain file
name stem, and the file ``<folder>/<name>.yaml`` must lie inside the served folder after
symbolic links are followed. Loaded plans are cached until the file changes.
"""

from __future__ import annotations

import re
import threading
from pathlib import Path
from typing import Any

from acquire.errors import PlanError

PLAN_NAME = r"^[A-Za-z0-9][A-Za-z0-9._-]{0,79}$"
_NAME = re.compile(PLAN_NAME)


class PlanBook:
    """The served plan folder and a cache of loaded plans."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder.expanduser().resolve()
        self._cache: dict[Path, tuple[tuple[int, int], Any]] = {}
        self._lock = threading.Lock()

    def path(self, name: str) -> Path:
        if not _NAME.match(name) or ".." in name:
            raise PlanError(f"plan {name!r}: a plan is named by its file name without "
                            "folder or .yaml (letters, digits, '.', '_', '-')")
        path = (self.folder / f"{name}.yaml").resolve()
        if path.parent != self.folder or not path.is_file():
            known = ", ".join(self.names()[:8]) or "none"
            raise PlanError(f"plan {name!r}: no such plan in {self.folder} (plans: {known})")
        return path

    def load(self, name: str) -> Any:
        from acquire.plan import load_plan

        path = self.path(name)
        info = path.stat()
        stamp = (info.st_mtime_ns, info.st_size)
        with self._lock:
            cached = self._cache.get(path)
            if cached is not None and cached[0] == stamp:
                return cached[1]
        plan = load_plan(path)
        with self._lock:
            self._cache[path] = (stamp, plan)
        return plan

    def names(self) -> list[str]:
        if not self.folder.is_dir():
            return []
        return sorted(p.stem for p in self.folder.glob("*.yaml") if _NAME.match(p.stem))
