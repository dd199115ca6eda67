"""A station's journal for a shared store: local first, forwarded in order.

The station journals into its own SQLite file (``journal.sqlite`` in its output folder),
exactly as without a store, so it keeps measuring when the server is gone and nothing is
reported before it is journalled on the station's disk. This connection's triggers note
every changed row in the file's ``outbox`` table, in order; after each write the outbox
is forwarded to the server (``pg_forward``: upserts under keys the rows already had, so a
retry never doubles a row) and the forwarded entries are removed. While the server is
unreachable the outbox grows; forwarding is tried again at the next write once
``retry_s`` has passed, and once more at close. An outage is journalled in the station's
file as one fault row when it starts and one when forwarding resumes, each with one line
on stderr; the attempts in between are silent.
"""

from __future__ import annotations

import contextlib
import sys
import threading
import time
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from acquire.errors import JournalError
from acquire.journal.pg_forward import TABLES, upsert_child, upsert_measurement, upsert_run
from acquire.journal.sqlite import SqliteJournal
from acquire.journal.sqlite_file import SqliteFile

BATCH = 200  # outbox entries forwarded per server transaction
STORE_UNREACHABLE = "StoreUnreachable"  # fault kinds of an outage's start and end
STORE_RESUMED = "StoreResumed"


class OutboxJournal(SqliteJournal):
    """The local journal of ``folder`` that forwards to the store at ``url``. Its rows are
    stamped with ``origin``; every run in the file is the station's own to settle."""

    scoped = False

    def __init__(self, folder: Path | str, url: str, *, origin: str,
                 retry_s: float = 5.0, connect_timeout_s: float = 3.0) -> None:
        self._next_try = float("inf")  # nothing is forwarded while the file is opened
        self._forwarding = threading.Lock()
        self._server: Any = None
        super().__init__(Path(folder) / "journal.sqlite")
        self.origin = origin
        self.url = url
        self.retry_s = retry_s
        self._connect_timeout_s = connect_timeout_s
        self._next_try = 0.0
        self.last_error: str | None = None
        self._run_ids: dict[int, int] = {}  # local run id -> server run id
        with self._lock:
            for table in TABLES:
                for event in ("INSERT", "UPDATE"):
                    self._db.execute(
                        f"CREATE TEMP TRIGGER IF NOT EXISTS outbox_{table}_{event.lower()} "
                        f"AFTER {event} ON main.{table} BEGIN INSERT INTO outbox(tbl, row_id) "
                        f"VALUES ('{table}', NEW.id); END")

    # -- writing: local, then forward ------------------------------------------------------
    @contextmanager
    def _tx(self) -> Iterator[Any]:
        with SqliteFile._tx(self) as db:
            yield db
        self.forward()

    def close(self) -> None:
        self.forward(force=True)
        if self._server is not None:
            self._server.close()
            self._server = None
        super().close()

    def backlog(self) -> int:
        """Changes not yet forwarded to the server."""
        return int(self._value("SELECT COUNT(*) FROM outbox"))

    def forward(self, *, force: bool = False) -> bool:
        """Forward the outbox, oldest change first; True when it is empty. A server that
        cannot be reached is tried again after ``retry_s`` (or when ``force``)."""
        if not force and time.monotonic() < self._next_try:
            return False
        if not self._forwarding.acquire(blocking=False):
            return False  # another thread is forwarding this outbox
        try:
            while self._forward_batch():
                pass
            if self.last_error is not None:
                self._outage_ends()
                while self._forward_batch():  # the row that says so
                    pass
        except JournalError as exc:
            self._cannot_forward(exc)
            return False
        finally:
            self._forwarding.release()
        return True

    def _cannot_forward(self, exc: JournalError) -> None:
        """Keep the changes for later; the first failure of an outage is journalled and
        shown once (later attempts of the same outage are silent)."""
        first = self.last_error is None
        self.last_error = " ".join(str(exc).split())
        self._run_ids.clear()  # ids learnt in a transaction that did not commit
        self._next_try = time.monotonic() + self.retry_s
        if self._server is not None:
            with contextlib.suppress(Exception):
                self._server.close()
            self._server = None
        if first:
            reason = self.last_error.removeprefix(f"journal {self._public_url()}: ")
            message = (f"shared store {self._public_url()} unreachable: {reason}; "
                       "journalling locally, will forward")
            self._journal_store_fault(STORE_UNREACHABLE, message, "journalling locally")
            print(f"sweepd: {message}", file=sys.stderr, flush=True)

    def _outage_ends(self) -> None:
        message = f"shared store {self._public_url()} reachable again; backlog forwarded"
        self.last_error = None
        self._journal_store_fault(STORE_RESUMED, message, "forwarded")
        print(f"sweepd: {message}", file=sys.stderr, flush=True)

    def _journal_store_fault(self, kind: str, message: str, action: str) -> None:
        """A fault row in the station's own file, under its newest open run (if any);
        forwarded with everything else."""
        run = self._value("SELECT MAX(id) FROM runs WHERE state = 'running'")
        with contextlib.suppress(JournalError):  # a full disk: the stderr line remains
            self.record_fault(None if run is None else int(run), kind, message,
                              action=action)

    def _public_url(self) -> str:
        from acquire.journal.postgres import public_url

        return public_url(self.url)

    def _forward_batch(self) -> bool:
        """One batch in one server transaction; False when the outbox is empty."""
        entries = self._rows("SELECT seq, tbl, row_id FROM outbox ORDER BY seq LIMIT ?",
                             (BATCH,))
        if not entries:
            return False
        server = self._open_server()
        with server._tx() as db:
            for entry in entries:
                self._forward_row(db, str(entry["tbl"]), int(entry["row_id"]))
        self._forget(int(entries[-1]["seq"]))
        return len(entries) == BATCH

    def _forget(self, last_seq: int) -> None:
        """Drop forwarded entries. Without a sync of its own: entries that come back after
        a power cut are forwarded again, which changes nothing on the server."""
        with self._lock:
            self._db.execute("PRAGMA synchronous=NORMAL")
            try:
                with SqliteFile._tx(self) as local:
                    local.execute("DELETE FROM outbox WHERE seq <= ?", (last_seq,))
            finally:
                self._db.execute("PRAGMA synchronous=FULL")

    def _open_server(self) -> Any:
        if self._server is None:
            from acquire.journal.postgres import PostgresJournal

            self._server = PostgresJournal(self.url, origin=self.origin,
                                           timeout_s=self._connect_timeout_s)
        return self._server

    def _forward_row(self, db: Any, table: str, row_id: int) -> None:
        if table == "runs":
            self._run_ids[row_id] = upsert_run(db, self._run_row(row_id))
            return
        row = self._one(f"SELECT * FROM {table} WHERE id = ?", (row_id,))
        if row is None:
            return
        run_id = self._server_run(db, row["run_id"])
        if table == "measurements":
            upsert_measurement(db, int(run_id), row)  # type: ignore[arg-type]
        else:
            upsert_child(db, table, run_id, f"{self.origin}#{table}#{row_id}", row)

    def _server_run(self, db: Any, local_run: int | None) -> int | None:
        if local_run is None:
            return None
        if local_run not in self._run_ids:
            self._run_ids[local_run] = upsert_run(db, self._run_row(local_run))
        return self._run_ids[local_run]

    def _run_row(self, run_id: int) -> dict[str, Any]:
        """A local run as forwarded: one journalled before runs had keys gets its key now."""
        row = self._one("SELECT * FROM runs WHERE id = ?", (run_id,))
        if row is None:
            raise JournalError(f"journal {self.where}: outbox names run {run_id}, which "
                               "is not in the journal")
        if not row.get("run_uid"):
            row["run_uid"] = uuid.uuid4().hex
            with SqliteFile._tx(self) as local:
                local.execute("UPDATE runs SET run_uid = ? WHERE id = ?",
                              (row["run_uid"], run_id))
        return {**row, "origin": row.get("origin") or self.origin}
