"""A capture's files: names from the plan's template, and ``store`` (JSON summary, raw
copy, Touchstone with the verdict in its comments; each atomic, never overwriting)."""

from __future__ import annotations

import json
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path
from typing import Any

from acquire.capture.judge import Capture
from acquire.journal.settle import remove_orphans
from acquire.plan import Plan
from acquire.storage import free_path, safe_component, write_new
from acquire.sweep import Sweep
from acquire.touchstone import TouchstoneOptions, write_touchstone
from acquire.utc import compact_utc, utc_now

SUMMARY_FORMAT = "sweepd-capture"
SUMMARY_VERSION = 1


def capture_path(plan: Plan, out_dir: Path, *, serial: str, verdict: str = "",
                 index: int | None = None, station: str = "", when: datetime | None = None,
                 suffix: str | None = None) -> Path:
    """The Touchstone path for a capture, built from the plan's name template."""
    fields = {
        "plan": plan.name,
        "serial": safe_component(serial) if serial else "unit",
        "time": compact_utc(when or utc_now()),
        "verdict": verdict or "none",
        "index": f"{index:06d}" if index is not None else "",
        "station": safe_component(station) if station else "",
    }
    stem = safe_component(plan.output.name.format(**fields), max_len=160)
    return out_dir / f"{stem}{suffix or f'.s{plan.ports}p'}"


def save_capture(sweep: Sweep, plan: Plan, path: Path, comments: tuple[str, ...] = (),
                 *, unique: bool = True) -> Path:
    """Write a sweep as Touchstone per the plan's output options; returns the final path.

    With ``unique=False`` the exact ``path`` is used or ``FileExistsError`` raised.
    """
    ts = plan.output.touchstone
    options = TouchstoneOptions(
        version=ts.version, fmt=ts.fmt, freq_unit=ts.freq_unit, precision=ts.precision
    )
    return write_touchstone(path, sweep, options, comments, unique=unique)


def raw_path_for(path: Path) -> Path:
    """Where the raw (uncorrected) copy of a capture goes: ``<stem>.raw.sNp``."""
    return path.with_name(f"{path.stem}.raw{path.suffix}")


def companions(path: Path) -> tuple[Path, ...]:
    """Every file a capture at ``path`` may write."""
    return (path, path.with_suffix(".json"), raw_path_for(path))


def plan_path(cap: Capture, plan: Plan, out_dir: Path, *, serial: str = "",
              index: int | None = None, station: str = "") -> Path:
    """A free Touchstone path for a capture, from the plan's name template."""
    verdict = cap.verdict.verdict if plan.checks or cap.verdict.results else ""
    path = capture_path(plan, out_dir, serial=serial, verdict=verdict, index=index,
                        station=station, when=utc_now())
    return free_path(path, companions)


@dataclass
class Stored:
    """Where a capture went."""

    touchstone: Path
    summary: Path
    raw: Path | None = None


def store(cap: Capture, plan: Plan, path: Path) -> Stored:
    """Write the capture at ``path`` (which must be free, see ``plan_path``).

    Order matters for crash safety: the JSON summary first, then the raw copy (if the
    plan keeps raw data), then the Touchstone file with the verdict in its comments, each
    atomically. A Touchstone file that exists is therefore complete, and so is everything
    written before it (``JournalStore.reconcile`` relies on this).
    """
    raw_path = raw_path_for(path) if plan.output.keep_raw and cap.corrected else None
    summary = summary_dict(cap, path, raw_path)
    judged = plan.checks or cap.verdict.results  # a golden capture is judged without them
    comments = tuple(cap.verdict.comment_lines()) if judged else ()
    if cap.uncertainty is not None:
        comments += tuple(cap.uncertainty.comment_lines())
    try:
        summary_path = write_new(path.with_suffix(".json"),
                                 json.dumps(summary, indent=2, allow_nan=False) + "\n",
                                 unique=False)
        if raw_path is not None:
            save_capture(cap.raw.with_meta(raw_of=path.name), plan, raw_path, unique=False)
        final = save_capture(cap.sweep, plan, path, comments, unique=False)
    except BaseException:
        if not path.exists():  # no summary saying PASS for a capture that never landed
            remove_orphans(path)
        raise
    return Stored(final, summary_path, raw_path)


def summary_dict(cap: Capture, touchstone: Path | None = None,
                 raw: Path | None = None) -> dict[str, Any]:
    """The verdict JSON plus a ``capture`` block (files, instrument, calibration)."""
    meta = cap.sweep.meta
    data = json.loads(cap.verdict.to_json())
    data["capture"] = {
        "format": SUMMARY_FORMAT,
        "version": SUMMARY_VERSION,
        "touchstone": str(touchstone) if touchstone else None,
        "raw_touchstone": str(raw) if raw else None,
        "plan": meta.get("plan"),
        "serial": meta.get("serial"),
        "instrument": meta.get("instrument"),
        "resource": meta.get("resource"),
        "started_utc": meta.get("started_utc"),
        "sweep_s": meta.get("sweep_s"),
        "calibration": {
            "id": meta.get("cal_id"),
            "method": meta.get("cal_method"),
            "age_s": meta.get("cal_age_s"),
            "interpolated": meta.get("cal_interpolated"),
            "warnings": list(cap.cal_warnings),
        } if cap.corrected else None,
        "warnings": list(cap.cal_warnings),
    }
    if cap.uncertainty is not None:
        data["uncertainty"] = json.loads(json.dumps(cap.uncertainty.to_dict(), allow_nan=False))
    return data
