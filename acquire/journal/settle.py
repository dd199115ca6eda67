"""Settling what a killed process left in the journal, from the files on disk.

Captures are written summary first, then the raw copy, then the Touchstone file itself
(see ``acquire.capture.files.store``), so a Touchstone file that exists is complete and so is
everything written before it: a pending row whose file exists is adopted (``stored``,
with its summary, raw copy, verdict and metrics read from those files). A pending row
whose Touchstone file never landed becomes ``interrupted``, and the files written ahead
of it are removed so that the folder and the journal agree.
"""

from __future__ import annotations

import contextlib
import json
from collections.abc import Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

from acquire.journal.hashes import file_sha256
from acquire.journal.states import INTERRUPTED_NOTE

if TYPE_CHECKING:
    from acquire.journal.store import JournalStore

ADOPTED_NOTE = "adopted after a restart: its files were complete"


def reconcile(store: JournalStore, *, adopt: bool = True, run_id: int | None = None
              ) -> list[tuple[int, str]]:
    """Settle pending rows (of one run when ``run_id`` is given: a daemon resuming one
    job must not touch rows another process has in flight). Returns ``(measurement id,
    new state)`` for each row changed."""
    changed = []
    for row in store.pending(run_id):
        mid = int(row["id"])
        path = Path(row["touchstone"]) if row["touchstone"] else None
        if adopt and path is not None and path.is_file():
            store.settle(mid, "stored", adopted_fields(path))
            changed.append((mid, "stored"))
            continue
        if path is not None and not path.exists():
            remove_orphans(path)
        store.settle(mid, "interrupted", {"note": INTERRUPTED_NOTE})
        changed.append((mid, "interrupted"))
    return changed


def adopted_fields(touchstone: Path) -> dict[str, Any]:
    """What the files of a complete capture say about it, as journal columns."""
    summary = touchstone.with_suffix(".json")
    raw = touchstone.with_name(f"{touchstone.stem}.raw{touchstone.suffix}")
    fields: dict[str, Any] = {
        "summary": str(summary) if summary.is_file() else None,
        "raw_touchstone": str(raw) if raw.is_file() else None,
    }
    try:
        data = json.loads(summary.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        data = None
    if isinstance(data, dict):
        capture = data.pop("capture", None) or {}
        judged = bool(data.get("checks"))
        cal = capture.get("calibration") or {}
        fields.update(
            verdict=data.get("verdict") if judged else None,
            exit_code=data.get("exit_code") if judged else None,
            worst_margin=worst_margin(data),
            metrics_json=json.dumps(data.get("metrics")),
            verdict_json=json.dumps(data),
            cal_id=cal.get("id"), cal_age_s=cal.get("age_s"),
            instrument=capture.get("instrument"),
        )
    fields["note"] = ADOPTED_NOTE
    fields["touchstone_sha256"] = file_sha256(touchstone)
    fields["summary_sha256"] = file_sha256(summary) if summary.is_file() else None
    return fields


def remove_orphans(touchstone: Path) -> None:
    """Files written ahead of a Touchstone file that never landed (its summary, raw copy):
    they describe a sweep the journal records as interrupted, so they go."""
    for orphan in (touchstone.with_suffix(".json"),
                   touchstone.with_name(f"{touchstone.stem}.raw{touchstone.suffix}")):
        with contextlib.suppress(FileNotFoundError):
            orphan.unlink()


def worst_margin(verdict: Mapping[str, Any]) -> float | None:
    """The smallest margin over all mask segments of a verdict dict (negative: failing)."""
    margins = [
        float(segment["worst"]["margin"])
        for check in verdict.get("checks") or ()
        for segment in check.get("segments") or ()
        if (segment.get("worst") or {}).get("margin") is not None
    ]
    return min(margins) if margins else None
