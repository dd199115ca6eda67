"""A throwaway PostgreSQL cluster in a temporary folder, for tests against a real server.

``initdb`` refuses to run as root: as root the cluster belongs to an unprivileged system
user (``sweepd-pg``, created when missing) and ``initdb``/``pg_ctl`` run through
``runuser``. The server listens on 127.0.0.1 at a free port and on a socket in its own
folder; it trusts local connections (a test cluster, never a production set-up). Skips
with a reason where PostgreSQL or psycopg is missing, and FAILS instead where
``SWEEPD_REQUIRE_POSTGRES=1`` (CI) says the tests must run.
"""

from __future__ import annotations

import glob
import os
import shutil
import socket
import subprocess
import tempfile
from collections.abc import Iterator
from contextlib import closing
from pathlib import Path

import pytest

REQUIRED = os.environ.get("SWEEPD_REQUIRE_POSTGRES") == "1"
SERVICE_USER = "sweepd-pg"


def _missing(reason: str) -> None:
    if REQUIRED:
        pytest.fail(f"SWEEPD_REQUIRE_POSTGRES=1 but {reason}", pytrace=False)
    pytest.skip(reason)


def find_bin(name: str) -> str | None:
    """A PostgreSQL server program: on PATH, else the newest under /usr/lib/postgresql."""
    found = shutil.which(name)
    if found:
        return found
    candidates = sorted(glob.glob(f"/usr/lib/postgresql/*/bin/{name}"),
                        key=lambda p: int(Path(p).parts[-3]) if Path(p).parts[-3].isdigit()
                        else 0)
    return candidates[-1] if candidates else None


def _free_port() -> int:
    with closing(socket.socket()) as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def _as_owner() -> list[str]:
    """The command prefix that runs server programs as a non-root user."""
    if os.geteuid() != 0:
        return []
    if subprocess.run(["id", "-u", SERVICE_USER], capture_output=True).returncode != 0:
        subprocess.run(["useradd", "--system", "--no-create-home", "--shell",
                        "/usr/sbin/nologin", SERVICE_USER], check=True, capture_output=True)
    return ["runuser", "-u", SERVICE_USER, "--"]


class Cluster:
    """One running throwaway cluster; ``url(db)`` names a database on it."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder
        self.data = folder / "data"
        self.socket_dir = folder / "sock"
        self.port = _free_port()
        self.prefix = _as_owner()
        self.initdb, self.pg_ctl = find_bin("initdb"), find_bin("pg_ctl")

    def _run(self, *args: str, check: bool = True) -> subprocess.CompletedProcess[str]:
        return subprocess.run([*self.prefix, *args], check=check, capture_output=True,
                              text=True, timeout=120)

    def init(self) -> None:
        self.socket_dir.mkdir(parents=True)
        if self.prefix:
            shutil.chown(self.folder, SERVICE_USER)
            shutil.chown(self.socket_dir, SERVICE_USER)
            self.folder.chmod(0o755)
        self._run(str(self.initdb), "-D", str(self.data), "-U", "postgres", "--auth=trust",
                  "--no-sync", "-E", "UTF8", "--locale=C")

    def start(self) -> None:
        opts = (f"-c listen_addresses=127.0.0.1 -p {self.port} "
                f"-c unix_socket_directories={self.socket_dir} -c fsync=off "
                "-c max_connections=100")
        self._run(str(self.pg_ctl), "-D", str(self.data), "-l", str(self.folder / "log"),
                  "-o", opts, "-w", "-t", "60", "start")

    def stop(self, mode: str = "fast") -> None:
        self._run(str(self.pg_ctl), "-D", str(self.data), "-m", mode, "-w", "stop",
                  check=False)

    def url(self, db: str = "postgres") -> str:
        return f"postgresql://postgres@127.0.0.1:{self.port}/{db}"

    def create_database(self, name: str) -> str:
        import psycopg

        with psycopg.connect(self.url(), autocommit=True) as conn:
            conn.execute(f'CREATE DATABASE "{name}"')
        return self.url(name)


@pytest.fixture(scope="session")
def pg_cluster() -> Iterator[Cluster]:
    try:
        import psycopg  # noqa: F401
    except ImportError:
        _missing("psycopg is not installed (pip install 'sweepd[store]')")
    if not (find_bin("initdb") and find_bin("pg_ctl")):
        _missing("PostgreSQL server programs (initdb, pg_ctl) are not installed; "
                 "apt-get install postgresql")
    folder = Path(tempfile.mkdtemp(prefix="sweepd-pg-"))
    cluster = Cluster(folder)
    try:
        cluster.init()
        cluster.start()
    except (subprocess.SubprocessError, OSError) as exc:
        detail = getattr(exc, "stderr", "") or exc
        shutil.rmtree(folder, ignore_errors=True)
        _missing(f"could not start a throwaway PostgreSQL cluster: {detail}")
    try:
        yield cluster
    finally:
        cluster.stop("immediate")
        shutil.rmtree(folder, ignore_errors=True)


_counter = iter(range(1_000_000))


@pytest.fixture
def pg_url(pg_cluster: Cluster) -> str:
    """A fresh, empty database on the session's cluster."""
    return pg_cluster.create_database(f"sweepd_test_{os.getpid()}_{next(_counter)}")
