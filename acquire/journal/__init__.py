"""The journal: the record of runs, measurements, faults, golden checks and alarms, kept
beside the data and written *before* anything is reported. It survives crashes: see
``acquire.journal.store`` for the write order and the interface, ``states`` for what
each state means, ``settle`` for reconciling after a kill, and ``sqlite`` for the
shipped backend (one SQLite file per output folder, ``journal.sqlite``).

Open one with ``open_journal(path)`` or ``journal_in(folder)``; code outside this
package holds a ``JournalStore`` and never sees SQL. A line shares one store: a
``postgresql://user@host/db`` URL (from ``SWEEPD_JOURNAL``, or passed as ``location``
from a configuration key). ``open_journal(url)`` opens the PostgreSQL backend
(``acquire.journal.postgres``) directly; ``journal_in(folder)`` keeps the station's own
file as an outbox that forwards to it (``acquire.journal.outbox``). Runs are marked with
the station folder they came from, so that settling after a crash touches only that
station's runs.
"""

from __future__ import annotations

import os
import socket
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
JOURNAL_ENV = "SWEEPD_JOURNAL"  # where the journal is kept, when not in the output folder

__all__ = [
    "DONE_STATES",
    "FINAL_STATES",
    "JOURNAL_ENV",
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
                 timeout_s: float = 30.0, origin: str | None = None) -> JournalStore:
    """The journal at ``path``, a SQLite file or a ``postgresql://`` URL (created, or
    upgraded to the current schema, unless ``read_only``)."""
    from acquire.journal.postgres import PostgresJournal, is_postgres_url

    if is_postgres_url(path):
        return PostgresJournal(str(path), read_only=read_only, origin=origin,
                               timeout_s=min(timeout_s, 10.0))
    from acquire.journal.sqlite import SqliteJournal

    journal = SqliteJournal(path, read_only=read_only, timeout_s=timeout_s)
    journal.origin = origin
    return journal


def journal_location(location: Path | str | None = None) -> str | None:
    """Where journals are kept when not in each output folder: ``location`` (a plan's or
    station's ``journal`` key) or else ``SWEEPD_JOURNAL``; None for the output folder."""
    chosen = location if location not in (None, "") else os.environ.get(JOURNAL_ENV, "")
    return str(chosen) if chosen else None


def journal_in(folder: Path | str, *, read_only: bool = False,
               location: Path | str | None = None) -> JournalStore:
    """The journal of an output folder: its own ``journal.sqlite``, or the journal named by
    ``location`` / ``SWEEPD_JOURNAL`` (see ``journal_location``). For a shared
    ``postgresql://`` store the folder's own file is kept too, as the outbox that forwards
    to the store (``acquire.journal.outbox``), and a read-only view reads it."""
    from acquire.journal.postgres import is_postgres_url

    shared = journal_location(location)
    if shared is None or (read_only and is_postgres_url(shared)):
        return open_journal(Path(folder) / JOURNAL_NAME, read_only=read_only)
    if is_postgres_url(shared):
        from acquire.journal.outbox import OutboxJournal

        return OutboxJournal(folder, shared, origin=station_origin(folder))
    return open_journal(shared, read_only=read_only, origin=station_origin(folder))


def station_origin(folder: Path | str) -> str:
    """How a shared store names the station folder a run comes from: host and path."""
    return f"{socket.gethostname()}:{Path(folder).resolve()}"
