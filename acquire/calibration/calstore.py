"""The cal store: the cal sets of a folder, newest first, by plan and instrument.

Cal set files themselves (format, reading, verifying) are ``acquire.calibration.calset``.
"""

from __future__ import annotations

import logging
from pathlib import Path
from typing import Any

from acquire.calibration.calset import SUFFIX, CalSet, read_header
from acquire.errors import CalError

log = logging.getLogger(__name__)


def list_calsets(cal_dir: Path | str, plan: str | None = None,
                 instrument: str | None = None) -> list[tuple[Path, dict[str, Any]]]:
    """(path, header) of the readable cal sets in ``cal_dir``, newest first.

    Filters by plan name and instrument identity when given. Unreadable files are logged
    as warnings and skipped.
    """
    found = []
    folder = Path(cal_dir)
    if not folder.is_dir():
        return []
    for path in folder.glob(f"*{SUFFIX}"):
        try:
            header = read_header(path)
        except CalError as exc:
            log.warning("skipping %s", exc)
            continue
        if plan is not None and header["plan"] != plan:
            continue
        if instrument is not None and not same_instrument(header["instrument"], instrument):
            continue
        found.append((path, header))
    found.sort(key=lambda item: (item[1]["created_utc"], item[0].name), reverse=True)
    return found


def find_latest(cal_dir: Path | str, plan: str, instrument: str | None = None) -> CalSet | None:
    """The newest cal set for ``plan`` (and instrument) that loads and verifies, or None."""
    for path, _header in list_calsets(cal_dir, plan, instrument):
        try:
            return CalSet.load(path)
        except CalError as exc:
            log.warning("skipping %s", exc)
    return None


def same_instrument(a: str, b: str) -> bool:
    """Identity strings compared field by field, ignoring blanks around commas and case."""
    return [p.strip().lower() for p in a.split(",")] == [p.strip().lower() for p in b.split(",")]
