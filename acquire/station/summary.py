"""Reading an output folder's journal for ``sweepd summary``: selection, text, JSON, CSV."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta
from pathlib import Path
from typing import Any

from acquire.journal import JOURNAL_NAME, open_journal
from acquire.station.errors import StationError
from acquire.station.records import Record, query_records
from acquire.station.report import PlanSummary, summarise, summary_lines
from acquire.utc import parse_iso, utc_now, utc_text

MAX_SINCE_S = 100 * 365.25 * 86400.0  # a duration back of at most a century


def parse_since(text: str, now: datetime | None = None) -> str:
    """``--since``: a duration back from now ("8 h") or an ISO 8601 date/time (local
    time unless it ends in Z or gives an offset); returned in the journal's UTC form."""
    from acquire.units import parse_quantity

    value = text.strip()
    shown = ascii(value[:40]) + ("..." if len(value) > 40 else "")
    try:
        seconds = parse_quantity(value, "time") if len(value) <= 40 else None
    except ValueError:
        seconds = None
    if seconds is not None:
        if not 0 <= seconds <= MAX_SINCE_S:
            raise StationError(f"--since {shown}: a duration back must be from 0 s to "
                               f"{MAX_SINCE_S / 86400 / 365.25:g} years")
        return utc_text((now or utc_now()) - timedelta(seconds=seconds))
    try:
        moment = parse_iso(value)
        if moment.tzinfo is None:
            moment = moment.astimezone()  # naive: the machine's local time
        return utc_text(moment)
    except (ValueError, OverflowError, OSError):
        raise StationError(f"--since {shown}: give a date or time such as 2026-12-02 or "
                           "2026-12-02T06:00, or a duration back such as '8 h'") from None


@dataclass
class Selection:
    folder: Path
    journal_path: Path
    since_utc: str | None
    records: list[Record]
    plans: list[PlanSummary]

    def lines(self) -> list[str]:
        head = f"journal {self.journal_path}: {len(self.records)} measurement(s)"
        if self.since_utc:
            head += f" since {self.since_utc}"
        if not self.records:
            return [head, "nothing to summarise"]
        return [head, *summary_lines(self.plans)]

    def to_dict(self) -> dict[str, Any]:
        return {"format": "sweepd-summary", "version": 1, "journal": str(self.journal_path),
                "since_utc": self.since_utc, "measurements": len(self.records),
                "plans": [p.to_dict() for p in self.plans]}

    def csv(self) -> str:
        from acquire.station.export import csv_text

        return csv_text(self.records)

    def write_csv(self, path: Path) -> Path:
        """Write (or replace) the CSV export atomically; it is derived from the journal."""
        from acquire.storage import replace_atomic

        try:
            return replace_atomic(path, self.csv())
        except OSError as exc:
            raise StationError(f"--csv {path}: cannot write ({exc.strerror or exc})") from None


def load_selection(folder: Path, *, since_utc: str | None = None, plan: str | None = None,
                   all_attempts: bool = False) -> Selection:
    if not folder.is_dir():
        raise StationError(f"summary {folder}: no such folder")
    path = folder / JOURNAL_NAME
    if not path.is_file():
        raise StationError(f"summary {folder}: no journal ({JOURNAL_NAME}) there; nothing "
                           "was measured into this folder")
    with open_journal(path) as journal:
        records = query_records(journal, since_utc=since_utc, plan=plan)
        golden = journal.golden_checks(since_utc=since_utc, plan=plan)
    return Selection(folder, path, since_utc, records,
                     summarise(records, golden, all_attempts=all_attempts))

