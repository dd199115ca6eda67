"""Helpers shared by the station, measure and summary tests (this module holds no tests).

A cal set for the shipped ``patch-station`` plan is made once per test process, by the
real guided calibration against the simulator (its analyzer switch connects the
standards), and copied into each test's output folder; the simulator's error box is the
same in every ``SimServer``, so the cal set fits them all.
"""

from __future__ import annotations

import dataclasses
import functools
import io
import shutil
import sqlite3
import tempfile
from datetime import datetime, timedelta, timezone
from pathlib import Path
from typing import Any

import yaml

from acquire.library import library_dir

PLAN = library_dir("plans") / "patch-station.yaml"
GOLDEN = library_dir("plans") / "golden" / "patch-station-golden.s1p"
# Units of the simulator's patch-2g45 lot and their verdicts against the plan's checks
# (the lot is deterministic per serial; checked again by the tests that use them).
GOOD = ("PA-0001", "PA-0002", "PA-0003")
BAD = ("PA-0006", "PA-0007", "PA-0008")


def write_plan(folder: Path, resource: str, *, name: str = "plan.yaml", **changes: Any
               ) -> Path:
    """The shipped patch-station plan pointed at ``resource``, output in ``folder/out``.

    ``changes`` replace top-level sections; ``station`` entries are merged into the
    shipped station section (``golden`` entries into its golden section).
    """
    data = yaml.safe_load(PLAN.read_text())
    data["instrument"]["resource"] = resource
    data["output"]["dir"] = str(folder / "out")
    data["calibration"]["prompt"] = "switch"
    station = data["station"]
    station["golden"]["reference"] = str(GOLDEN)
    for key, value in (changes.pop("station", None) or {}).items():
        if key == "golden" and isinstance(value, dict):
            station["golden"].update(value)
        elif value is None:
            station.pop(key, None)
        else:
            station[key] = value
    data.update(changes)
    path = folder / name
    path.write_text(yaml.safe_dump(data, sort_keys=False))
    return path


@functools.lru_cache(maxsize=1)
def _calset() -> tuple[str, bytes]:
    from acquire.guided import Options, calibrate
    from acquire.plan import load_plan
    from simulators.server import SimServer

    folder = Path(tempfile.mkdtemp(prefix="sweepd-station-cal-"))
    try:
        with SimServer(time_scale=0.0, noise=False) as sim:
            plan = load_plan(write_plan(folder, sim.tcp_resource))
            outcome = calibrate(plan, Options(prompt="switch",
                                              compare_last=False), stdout=io.StringIO())
        assert outcome.saved is not None
        return outcome.saved.name, outcome.saved.read_bytes()
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def install_cal(out_dir: Path, *, age_s: float = 0.0) -> Path:
    """Put the test cal set into ``out_dir/cal``, dated ``age_s`` seconds ago."""
    from acquire.calibration import CalSet

    name, data = _calset()
    cal_dir = out_dir / "cal"
    cal_dir.mkdir(parents=True, exist_ok=True)
    if age_s == 0.0:
        path = cal_dir / name
        path.write_bytes(data)
        return path
    cal = CalSet.from_bytes(data)
    when = datetime.now(timezone.utc) - timedelta(seconds=age_s)
    old = dataclasses.replace(cal, created_utc=when.strftime("%Y-%m-%dT%H:%M:%S.%fZ"))
    return old.save(cal_dir)


def rows(out_dir: Path, sql: str, params: tuple = ()) -> list[sqlite3.Row]:
    """Read the journal with a plain connection (as another program would)."""
    db = sqlite3.connect(out_dir / "journal.sqlite")
    db.row_factory = sqlite3.Row
    try:
        return db.execute(sql, params).fetchall()
    finally:
        db.close()


def captures(out_dir: Path) -> set[Path]:
    return {p for p in out_dir.glob("*.s1p")}
