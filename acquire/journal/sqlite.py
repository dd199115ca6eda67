"""The journal in one SQLite file (WAL mode, ``synchronous=FULL``), kept in the output
folder as ``journal.sqlite``: the shared queries (``sql_journal``) over the file
(``sqlite_file``, schema in ``sqlite_schema``). Everything else speaks ``JournalStore``.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Sequence
from typing import Any

from acquire.journal.sql_journal import SqlJournal
from acquire.journal.sqlite_file import SqliteFile


class SqliteJournal(SqliteFile, SqlJournal):
    """One journal file behind the ``JournalStore`` interface."""

    def _insert(self, db: Any, sql: str, params: Sequence[Any]) -> int:
        return int(db.execute(sql, tuple(params)).lastrowid)

    def _duplicate(self, exc: BaseException) -> bool:
        return isinstance(exc, sqlite3.IntegrityError)
