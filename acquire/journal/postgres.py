"""The journal in a shared PostgreSQL database (psycopg 3): several stations, one store.

The queries are the shared ones (``sql_journal``); this module holds the connection,
the ``?`` to ``%s`` placeholder change, transactions, migrations (``pg_schema``) and
PostgreSQL errors turned into one-line ``JournalError``s naming the server (never its
password). A lost connection is reopened at the next call; the statement that met the
loss fails with a ``JournalError`` (``JournalUnreachable``) and may be retried: runs and
captures carry idempotent keys, so a retry after a lost reply makes no duplicate.

psycopg is an optional extra (``pip install 'sweepd[store]'``); without it a
``postgresql://`` journal is refused with one line saying so.
"""

from __future__ import annotations

import threading
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from typing import Any
from urllib.parse import urlsplit, urlunsplit

from acquire.errors import JournalError
from acquire.journal.pg_schema import MIGRATION_LOCK, MIGRATIONS, SCHEMA_VERSION, VERSION_TABLE
from acquire.journal.sql_journal import SqlJournal
from acquire.journal.store import Row
from acquire.utc import utc_text

URL_SCHEMES = ("postgresql", "postgres")


class JournalUnreachable(JournalError):
    """The server could not be reached (or the connection broke): worth retrying later."""


def is_postgres_url(location: object) -> bool:
    return isinstance(location, str) and location.split("://", 1)[0] in URL_SCHEMES \
        and "://" in location


def public_url(url: str) -> str:
    """The URL as messages show it: any password is replaced by ``***``."""
    parts = urlsplit(url)
    if parts.password is None:
        return url
    host = parts.hostname or ""
    netloc = f"{parts.username or ''}:***@{host}" + (f":{parts.port}" if parts.port else "")
    return urlunsplit((parts.scheme, netloc, parts.path, parts.query, parts.fragment))


def _psycopg() -> Any:
    try:
        import psycopg
    except ImportError:
        raise JournalError("a postgresql:// journal needs psycopg: pip install "
                           "'sweepd[store]'") from None
    return psycopg


class _Placeholders:
    """A connection that takes the shared queries' ``?`` placeholders."""

    def __init__(self, conn: Any) -> None:
        self._conn = conn

    def execute(self, sql: str, params: Sequence[Any] = ()) -> Any:
        return self._conn.execute(sql.replace("?", "%s"), tuple(params))


class PostgresJournal(SqlJournal):
    """A shared journal on a PostgreSQL server behind the ``JournalStore`` interface.
    ``origin`` names the station folder it is opened for (see ``SqlJournal``)."""

    def __init__(self, url: str, *, read_only: bool = False, origin: str | None = None,
                 timeout_s: float = 10.0) -> None:
        self._psycopg = _psycopg()
        self.url = url
        self.where = public_url(url)
        self.read_only = read_only
        self.origin = origin
        self._timeout_s = timeout_s
        self._lock = threading.RLock()
        self._conn: Any = None
        with self._lock:
            self._connect()

    # -- connection ---------------------------------------------------------------------------
    def _connect(self) -> Any:
        if self._conn is not None and not self._conn.closed:
            return self._conn
        try:
            conn = self._psycopg.connect(self.url, connect_timeout=max(1, int(self._timeout_s)),
                                         application_name="sweepd", autocommit=True)
        except self._psycopg.Error as exc:
            raise self._error(exc) from None
        self._conn = conn
        try:
            self._migrate(conn)
            if self.read_only:
                conn.read_only = True
        except BaseException:
            conn.close()
            self._conn = None
            raise
        return conn

    def close(self) -> None:
        with self._lock:
            if self._conn is not None:
                self._conn.close()
                self._conn = None

    def _error(self, exc: BaseException) -> JournalError:
        text = " ".join(str(exc).split()) or type(exc).__name__
        if isinstance(exc, self._psycopg.OperationalError):
            return JournalUnreachable(f"journal {self.where}: server unreachable ({text})")
        return JournalError(f"journal {self.where}: {text}")

    def _lost(self, exc: BaseException) -> None:
        """After an error: a broken connection is dropped, to be reopened next call."""
        if self._conn is not None and (self._conn.broken or self._conn.closed):
            self._conn = None

    # -- schema -------------------------------------------------------------------------------
    def _migrate(self, conn: Any) -> None:
        psycopg = self._psycopg
        try:
            version = self._read_version(conn)
            if version == SCHEMA_VERSION:
                return
            self._check_version(version)
            with conn.transaction():
                conn.execute("SELECT pg_advisory_xact_lock(%s)", (MIGRATION_LOCK,))
                conn.execute(VERSION_TABLE)
                version = self._read_version(conn)
                self._check_version(version)
                for target in range(version + 1, SCHEMA_VERSION + 1):
                    for statement in MIGRATIONS[target].split(";"):
                        if statement.strip():
                            conn.execute(statement)
                    conn.execute("INSERT INTO sweepd_schema(version, applied_utc) "
                                 "VALUES (%s, %s)", (target, utc_text()))
        except psycopg.Error as exc:
            raise self._error(exc) from None

    @staticmethod
    def _read_version(conn: Any) -> int:
        with conn.transaction():
            if conn.execute("SELECT to_regclass('sweepd_schema')").fetchone()[0] is None:
                return 0
            return int(conn.execute("SELECT COALESCE(MAX(version), 0) FROM sweepd_schema")
                       .fetchone()[0])

    def _check_version(self, version: int) -> None:
        if version > SCHEMA_VERSION:
            raise JournalError(f"journal {self.where}: schema version {version} is newer "
                               f"than this sweepd understands ({SCHEMA_VERSION}); upgrade "
                               "sweepd")
        if version < SCHEMA_VERSION and self.read_only:
            raise JournalError(f"journal {self.where}: schema version {version} needs an "
                               "upgrade, and this view is read-only")

    @property
    def schema_version(self) -> int:
        with self._lock:
            try:
                return self._read_version(self._connect())
            except self._psycopg.Error as exc:
                self._lost(exc)
                raise self._error(exc) from None

    # -- statements -----------------------------------------------------------------------------
    @contextmanager
    def _tx(self) -> Iterator[_Placeholders]:
        """One transaction, rolled back on any exception; PostgreSQL errors become
        one-line ``JournalError``s naming the server."""
        if self.read_only:
            raise JournalError(f"journal {self.where}: opened read-only")
        with self._lock:
            conn = self._connect()
            try:
                with conn.transaction():
                    yield _Placeholders(conn)
            except self._psycopg.Error as exc:
                self._lost(exc)
                raise self._error(exc) from None

    def _rows(self, sql: str, params: Sequence[Any] = ()) -> list[Row]:
        from psycopg.rows import dict_row

        with self._lock:
            conn = self._connect()
            try:
                with conn.transaction(), conn.cursor(row_factory=dict_row) as cur:
                    cur.execute(sql.replace("?", "%s"), tuple(params))
                    return list(cur.fetchall())
            except self._psycopg.Error as exc:
                self._lost(exc)
                raise self._error(exc) from None

    def _insert(self, db: Any, sql: str, params: Sequence[Any]) -> int:
        return int(db.execute(sql + " RETURNING id", params).fetchone()[0])

    def _duplicate(self, exc: BaseException) -> bool:
        return isinstance(exc, self._psycopg.errors.UniqueViolation)
