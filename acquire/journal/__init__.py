"""The journal: the record of runs, measurements, faults, golden checks and alarms, kept
beside the data and written *before* anything is reported. It survives crashes: see
``acquire.journal.store`` for the write order and the interface, ``states`` for what
each state means, ``settle`` for reconciling after a kill, and ``sqlite`` for the
shipped backend (one SQLite file per output folder, ``journal.sqlite``).

Open one with ``open_journal(path)`` or ``journal_in(folder)``; code outside this
package holds a ``JournalStore`` and never sees SQL.
"""

from __future__ import annotations

from pathlib import Path

from acquire.journal.settle import worst_margin
from acquire.journal.states import (
    DONE_STATES,
    FINAL_STATES,
    MEASUREMENT_STATES,
    RUN_STATES,
)
from acquire.journal.store import JournalStore, Planned, Row, StoredFields
from acquire.utc import utc_text

JOURNAL_NAME = "journal.sqlite"

__all__ = [
    "DONE_STATES",
    "FINAL_STATES",
    "JOURNAL_NAME",
    "MEASUREMENT_STATES",
    "RUN_STATES",
    "JournalStore",
    "Planned",
    "Row",
    "StoredFields",
    "journal_in",
    "open_journal",
    "utc_text",
    "worst_margin",
]


def open_journal(path: Path | str, *, read_only: bool = False,
                 timeout_s: float = 30.0) -> JournalStore:
    """The journal at ``path`` (created, or upgraded to the current schema, unless
    ``read_only``)."""
    from acquire.journal.sqlite import SqliteJournal

    return SqliteJournal(path, read_only=read_only, timeout_s=timeout_s)


def journal_in(folder: Path | str, *, read_only: bool = False) -> JournalStore:
    """The journal of an output folder."""
    return open_journal(Path(folder) / JOURNAL_NAME, read_only=read_only)
