"""The SQLite file under the journal: connection, WAL, schema version and migrations,
transactions, and SQLite errors turned into one-line ``JournalError``s naming the file.

Writers take ``BEGIN IMMEDIATE`` transactions, serialised between the threads of one
process by a lock and between processes by SQLite's busy timeout. A read-only view opens
the file with ``mode=ro`` (it never disturbs a running writer); an older file is
upgraded by a short writable open first.
"""

from __future__ import annotations

import contextlib
import shutil
import sqlite3
import threading
import time
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from acquire.errors import JournalError
from acquire.journal.sqlite_schema import MIGRATIONS, SCHEMA_VERSION
from acquire.journal.store import Row


class SqliteFile:
    """One journal file, opened (see the module docstring)."""

    def __init__(self, path: Path | str, *, timeout_s: float = 30.0,
                 read_only: bool = False) -> None:
        self.path = Path(path)
        self.where = str(self.path)
        self.read_only = read_only
        self._lock = threading.RLock()
        refuse_links(self.path)
        if read_only and not self.path.is_file():
            raise JournalError(f"journal {self.path}: not found")
        if read_only and _file_version(self.path) < SCHEMA_VERSION:
            type(self)(self.path, timeout_s=timeout_s).close()  # upgrade it first
        try:
            self._db = self._connect(timeout_s)
        except sqlite3.Error as exc:
            raise _journal_error(self.path, exc) from None

    def _connect(self, timeout_s: float) -> sqlite3.Connection:
        if self.read_only:
            db = sqlite3.connect(f"{self.path.resolve().as_uri()}?mode=ro", uri=True,
                                 timeout=timeout_s, check_same_thread=False)
            db.row_factory = sqlite3.Row
            self._check_version(db, _version(db))
            return db
        self.path.parent.mkdir(parents=True, exist_ok=True)
        db = sqlite3.connect(self.path, timeout=timeout_s, isolation_level=None,
                             check_same_thread=False)
        db.row_factory = sqlite3.Row
        self._db = db
        _retry_busy(self._enter_wal, timeout_s)
        db.execute("PRAGMA synchronous=FULL")
        # checkpoint the WAL at about 1 MB (the default lets it reach about 4 MB), so a
        # nearly full disk is not eaten by the journal's own log
        db.execute(f"PRAGMA wal_autocheckpoint={WAL_CHECKPOINT_PAGES}")
        db.execute("PRAGMA foreign_keys=ON")
        _retry_busy(self._migrate, timeout_s)
        return db

    def _enter_wal(self) -> None:
        # Changing the journal mode takes a lock without SQLite's busy handler, so only
        # ask for it when the file is not in WAL mode already (a new journal).
        if self._db.execute("PRAGMA journal_mode").fetchone()[0].lower() != "wal":
            self._db.execute("PRAGMA journal_mode=WAL")

    def close(self) -> None:
        with self._lock:
            self._db.close()

    # -- schema ------------------------------------------------------------------------
    def _check_version(self, db: sqlite3.Connection, version: int) -> None:
        if version > SCHEMA_VERSION:
            raise JournalError(f"journal {self.path}: schema version {version} is newer "
                               f"than this sweepd understands ({SCHEMA_VERSION}); upgrade "
                               "sweepd")
        if version < SCHEMA_VERSION and self.read_only:
            raise JournalError(f"journal {self.path}: schema version {version} needs an "
                               "upgrade, and the file is read-only here")

    def _migrate(self) -> None:
        if _version(self._db) == SCHEMA_VERSION:
            return  # the usual case: no write lock needed to open the journal
        with self._tx() as db:
            version = _version(db)
            self._check_version(db, version)
            for target in range(version + 1, SCHEMA_VERSION + 1):
                for statement in MIGRATIONS[target].split(";"):
                    if statement.strip():
                        db.execute(statement)
                db.execute("INSERT OR REPLACE INTO meta(key, value) "
                           "VALUES ('schema_version', ?)", (str(target),))
                db.execute(f"PRAGMA user_version = {int(target)}")

    @property
    def schema_version(self) -> int:
        with self._lock:
            return _version(self._db)

    @contextmanager
    def _tx(self) -> Iterator[sqlite3.Connection]:
        """BEGIN IMMEDIATE ... COMMIT, rolled back on any exception; SQLite errors
        become one-line ``JournalError``s naming the file."""
        if self.read_only:
            raise JournalError(f"journal {self.path}: opened read-only")
        with self._lock:
            try:
                self._db.execute("BEGIN IMMEDIATE")
                try:
                    yield self._db
                except BaseException:
                    self._db.execute("ROLLBACK")
                    raise
                self._db.execute("COMMIT")
            except sqlite3.Error as exc:
                raise _journal_error(self.path, exc) from None

    def _rows(self, sql: str, params: Sequence[Any] = ()) -> list[Row]:
        with self._lock:
            try:
                return [dict(r) for r in self._db.execute(sql, tuple(params)).fetchall()]
            except sqlite3.Error as exc:
                raise _journal_error(self.path, exc) from None

    def _one(self, sql: str, params: Sequence[Any] = ()) -> Row | None:
        rows = self._rows(sql, params)
        return rows[0] if rows else None

    def _value(self, sql: str, params: Sequence[Any] = ()) -> Any:
        row = self._one(sql, params)
        return None if row is None else next(iter(row.values()))


def _version(db: sqlite3.Connection) -> int:
    """The file's schema version: ``user_version``, else version 1's ``meta`` row."""
    version = int(db.execute("PRAGMA user_version").fetchone()[0])
    if version:
        return version
    has_meta = db.execute(
        "SELECT 1 FROM sqlite_master WHERE type='table' AND name='meta'").fetchone()
    if not has_meta:
        return 0
    row = db.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
    return int(row[0]) if row else 0


def _file_version(path: Path) -> int:
    try:
        db = sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True, timeout=10.0)
        try:
            return _version(db)
        finally:
            db.close()
    except sqlite3.Error as exc:
        raise JournalError(f"journal {path}: {exc}") from None


def refuse_links(path: Path) -> None:
    """The journal (and SQLite's files beside it) must be real files: a symbolic link is
    refused, never followed (it would turn its target into a database)."""
    for candidate in (path, path.with_name(path.name + "-wal"),
                      path.with_name(path.name + "-shm")):
        if candidate.is_symlink():
            raise JournalError(f"journal {path}: {candidate.name} is a symbolic link; the "
                               "journal must be a real file (remove the link)")


WAL_CHECKPOINT_PAGES = 256
FULL_BELOW = 1 << 20  # an I/O error with less free space than this is a full disk


def _journal_error(path: Path, exc: sqlite3.Error) -> JournalError:
    """One line naming the journal; a full disk is called so (SQLite reports it as
    'database or disk is full', or as an I/O error when its WAL index cannot grow)."""
    text = str(exc)
    full = "full" in text.lower()
    if not full and "i/o error" in text.lower():
        with contextlib.suppress(OSError):
            full = shutil.disk_usage(path.parent).free < FULL_BELOW
    if full:
        return JournalError(f"journal {path}: the disk is full ({text}); free some space: "
                            "captures already written are recorded at the next start, "
                            "nothing half-written is kept")
    return JournalError(f"journal {path}: {text}")


def _retry_busy(step: Callable[[], None], timeout_s: float) -> None:
    """Run ``step``, retrying while another connection holds a lock SQLite will not wait
    for (switching to WAL, recovering a WAL after a crash)."""
    deadline = time.monotonic() + timeout_s
    delay = 0.005
    while True:
        try:
            return step()
        except (sqlite3.OperationalError, JournalError) as exc:
            text = str(exc).lower()
            if ("locked" not in text and "busy" not in text) or time.monotonic() > deadline:
                raise
        time.sleep(delay)
        delay = min(delay * 2, 0.2)


def text_or_none(value: Any) -> str | None:
    return None if value is None else str(value)
