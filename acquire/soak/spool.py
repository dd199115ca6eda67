"""The spool: soak jobs and their state on disk, shared by serve, submit, status, cancel.

    <spool>/                     mode 0700 (control is local to one user)
      serve.lock                 held (flock) by the running ``sweepd serve``; holds its pid
      jobs/<job-id>/
        job.json                 what was submitted (immutable): plan snapshot, paths, resource,
                                 the job's unique id (``uid``) and its data folder's name
        state.json               queued | running | held | finished | cancelled | failed
        status.json              live progress written by the worker (sweeps, drift, faults)
        cancel                   present when ``sweepd cancel`` asked the job to stop

A job id (``<plan>-NNN``) is short and only unique within its spool; the job's identity
is its ``uid`` (a time-ordered UUID, version 7), stored with its journal run: resuming
matches on it, so a job of another spool writing into the same output folder never
adopts this one's record. Its data folder is ``<output>/<job-id>``, or
``<output>/<job-id>-<uid tail>`` when that name is taken, and carries a ``.sweepd-job``
marker with the uid.

Job files are written atomically (temp file, fsync, rename) and never world-writable, so
any command may read them from another shell while the daemon runs. Only the daemon
writes ``state.json`` of a job it runs; ``cancel`` writes it only when no daemon runs.
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import getpass
import json
import os
import re
import time
import uuid
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from acquire.errors import PlanError
from acquire.safejson import loads_bounded
from acquire.soak.ownership import OwnershipError, check_private
from acquire.storage import replace_atomic, write_new
from acquire.utc import utc_text
from drivers.errors import SweepdError
from drivers.yamlnode import one_line

ENV_SPOOL = "SWEEPD_SPOOL"
DATA_MARKER = ".sweepd-job"
JOB_STATES = ("queued", "running", "held", "finished", "cancelled", "failed")
ACTIVE_STATES = ("queued", "running", "held")
MAX_JOB_FILE_BYTES = 8 * 1024 * 1024  # job.json holds a plan snapshot: a few KB
_JOB_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,80}-\d{3,}$")


class SpoolError(SweepdError):
    """The spool or a job in it cannot be used (missing, unsafe, locked, unknown job)."""


def default_spool() -> Path:
    """``$SWEEPD_SPOOL``, else ``$XDG_STATE_HOME/sweepd/spool`` (``~/.local/state``)."""
    if os.environ.get(ENV_SPOOL):
        return Path(os.environ[ENV_SPOOL]).expanduser()
    state = os.environ.get("XDG_STATE_HOME") or str(Path.home() / ".local" / "state")
    return Path(state) / "sweepd" / "spool"


@dataclass(frozen=True)
class Job:
    """One submitted soak job (what ``job.json`` holds, plus where its files are)."""

    id: str
    dir: Path
    plan_name: str
    plan_source: Path
    plan_text: str
    output_dir: Path
    resource: str
    submitted_utc: str
    submitted_by: str
    uid: str = ""  # empty only for jobs submitted before job identities existed
    data_name: str = ""

    @property
    def data_dir(self) -> Path:
        """Where the job's captures, drift records and report go."""
        return self.output_dir / (self.data_name or self.id)

    def claim_data_dir(self) -> None:
        """Create the data folder, or check that it is this job's (``.sweepd-job``)."""
        self.data_dir.mkdir(parents=True, exist_ok=True, mode=0o700)
        marker = self.data_dir / DATA_MARKER
        if not self.uid:
            return
        try:
            owner = marker.read_text(encoding="utf-8").strip()
        except FileNotFoundError:
            write_new(marker, self.uid + "\n", unique=False)
            return
        except OSError as exc:
            raise SpoolError(f"job {self.id}: {marker}: unreadable ({exc.strerror})") from None
        if owner != self.uid:
            raise SpoolError(f"job {self.id}: data folder {self.data_dir} belongs to another "
                             f"job (uid {owner[:40]}); nothing was written there")

    @property
    def state_path(self) -> Path:
        return self.dir / "state.json"

    @property
    def status_path(self) -> Path:
        return self.dir / "status.json"

    @property
    def cancel_path(self) -> Path:
        return self.dir / "cancel"

    def load_plan(self) -> Any:
        """The plan as submitted (snapshot), with paths resolved from its original folder."""
        from acquire.plan import parse_plan
        from acquire.yamlfile import Node
        from drivers.yamltext import load_yaml_text

        raw = load_yaml_text(self.plan_text, f"job {self.id}: stored plan", PlanError)
        root = Node(raw, f"plan {self.plan_source}", error=PlanError,
                    base_dir=self.plan_source.parent)
        return parse_plan(root, self.plan_source)

    def read_state(self) -> dict[str, Any]:
        return read_json(self.state_path, {"state": "queued"})

    def write_state(self, **changes: Any) -> dict[str, Any]:
        state = {**self.read_state(), **changes, "updated_utc": utc_text()}
        replace_atomic(self.state_path, json.dumps(state, indent=2) + "\n")
        return state

    def read_status(self) -> dict[str, Any]:
        return read_json(self.status_path, {})

    def write_status(self, status: dict[str, Any]) -> None:
        replace_atomic(self.status_path, json.dumps(status, indent=2, allow_nan=False) + "\n")

    @property
    def cancel_requested(self) -> bool:
        return self.cancel_path.exists()

    def request_cancel(self, who: str) -> None:
        with contextlib.suppress(FileExistsError):
            write_new(self.cancel_path, json.dumps({"by": who, "utc": utc_text()}) + "\n",
                      unique=False)

    def check_trusted(self) -> None:
        """Refuse a job whose folder or files another user owns or may write (its plan
        names commands the daemon runs)."""
        for path in (self.dir, self.dir / "job.json", self.state_path):
            check_private(path, f"job {self.id}:")

    def to_json(self) -> dict[str, Any]:
        return {
            "id": self.id, "plan_name": self.plan_name, "plan_source": str(self.plan_source),
            "plan_text": self.plan_text, "output_dir": str(self.output_dir),
            "resource": self.resource, "submitted_utc": self.submitted_utc,
            "submitted_by": self.submitted_by, "uid": self.uid, "data_name": self.data_name,
        }

    @classmethod
    def from_dir(cls, folder: Path) -> Job:
        data = read_json(folder / "job.json", None)
        if data is None:
            raise SpoolError(f"job {folder.name}: {folder / 'job.json'} is missing")
        if not isinstance(data, dict):
            raise SpoolError(f"job {folder.name}: job.json must hold a JSON object")
        try:
            return cls(
                id=str(data["id"]), dir=folder, plan_name=str(data["plan_name"]),
                plan_source=Path(data["plan_source"]), plan_text=str(data["plan_text"]),
                output_dir=Path(data["output_dir"]), resource=str(data["resource"]),
                submitted_utc=str(data["submitted_utc"]),
                submitted_by=str(data.get("submitted_by", "")),
                uid=str(data.get("uid") or ""), data_name=str(data.get("data_name") or ""),
            )
        except (KeyError, TypeError) as exc:
            raise SpoolError(f"job {folder.name}: job.json lacks {exc}") from None


class Spool:
    """A spool folder (see the module docstring)."""

    def __init__(self, root: Path | str | None = None) -> None:
        self.root = Path(root).expanduser() if root else default_spool()
        self.jobs_dir = self.root / "jobs"
        self.lock_path = self.root / "serve.lock"

    def ensure(self) -> Spool:
        """Create the spool (mode 0700) or check an existing one is not open to others."""
        try:
            if not self.root.exists():
                self.root.parent.mkdir(parents=True, exist_ok=True)
                self.root.mkdir(mode=0o700)
            self.jobs_dir.mkdir(exist_ok=True, mode=0o700)
        except OSError as exc:
            raise SpoolError(f"spool {self.root}: cannot create ({exc.strerror})") from None
        for folder in (self.root, self.jobs_dir):
            try:
                check_private(folder, "spool")
            except OwnershipError as exc:
                raise SpoolError(str(exc)) from None
        return self

    def require(self) -> Spool:
        if not self.jobs_dir.is_dir():
            raise SpoolError(f"spool {self.root}: no jobs folder (nothing submitted yet; "
                             f"--spool or ${ENV_SPOOL} picks another spool)")
        return self

    # -- jobs --------------------------------------------------------------------------
    def create_job(self, plan_name: str, plan_source: Path, plan_text: str,
                   output_dir: Path, resource: str) -> Job:
        """Reserve a new job id ``<plan>-NNN`` and write its job and state files."""
        self.ensure()
        number = 1 + max((_number(p.name, plan_name) for p in self.jobs_dir.iterdir()),
                         default=0)
        while True:
            job_id = f"{plan_name}-{number:03d}"
            folder = self.jobs_dir / job_id
            try:
                folder.mkdir(mode=0o700)
                break
            except FileExistsError:
                number += 1
        uid = new_job_uid()
        data_name = job_id
        if (output_dir / data_name).exists():  # an earlier job of another spool
            data_name = f"{job_id}-{uid[-12:]}"
        job = Job(job_id, folder, plan_name, plan_source, plan_text, output_dir, resource,
                  utc_text(), _user(), uid, data_name)
        write_new(folder / "job.json", json.dumps(job.to_json(), indent=2) + "\n",
                  unique=False)
        job.write_state(state="queued")
        return job

    def jobs(self) -> list[Job]:
        """Every complete job, oldest first (folders still being created are skipped)."""
        if not self.jobs_dir.is_dir():
            return []
        jobs = []
        for folder in self.jobs_dir.iterdir():
            if folder.is_dir() and (folder / "job.json").is_file() and \
                    (folder / "state.json").is_file():
                with contextlib.suppress(SpoolError):
                    jobs.append(Job.from_dir(folder))
        return sorted(jobs, key=lambda j: (j.submitted_utc, j.id))

    def find(self, text: str) -> Job:
        """A job by id or by a prefix that names exactly one job."""
        jobs = self.jobs()
        exact = [j for j in jobs if j.id == text]
        if exact:
            return exact[0]
        matches = [j for j in jobs if j.id.startswith(text)] if text else []
        if len(matches) == 1:
            return matches[0]
        if not matches:
            known = ", ".join(j.id for j in jobs[-5:]) or "none"
            raise SpoolError(f"spool {self.root}: no job {text!r} (recent: {known})")
        raise SpoolError(f"spool {self.root}: {text!r} matches several jobs: "
                         f"{', '.join(j.id for j in matches)}")

    # -- the daemon lock -----------------------------------------------------------------
    def lock(self) -> DaemonLock:
        return DaemonLock(self.lock_path)

    def daemon_pid(self) -> int | None:
        """The pid of the ``sweepd serve`` holding this spool, or None when none runs."""
        if not self.lock_path.exists():
            return None
        probe = DaemonLock(self.lock_path)
        if probe.try_acquire(write_pid=False):
            probe.release()
            return None
        with contextlib.suppress(OSError, ValueError):
            return int(self.lock_path.read_text().strip() or 0) or -1
        return -1


class DaemonLock:
    """An exclusive ``flock`` on ``serve.lock``; the kernel drops it when the holder dies."""

    def __init__(self, path: Path) -> None:
        self.path = path
        self._fd: int | None = None

    def try_acquire(self, *, write_pid: bool = True) -> bool:
        fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o600)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError as exc:
            os.close(fd)
            if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
                return False
            raise
        self._fd = fd
        if write_pid:
            os.ftruncate(fd, 0)
            os.write(fd, f"{os.getpid()}\n".encode())
            os.fsync(fd)
        return True

    def release(self) -> None:
        if self._fd is not None:
            fcntl.flock(self._fd, fcntl.LOCK_UN)
            os.close(self._fd)
            self._fd = None


def read_json(path: Path, default: Any) -> Any:
    """A small JSON state file, or ``default`` when it does not exist."""
    try:
        with open(path, "rb") as handle:
            data = handle.read(MAX_JOB_FILE_BYTES + 1)
        if len(data) > MAX_JOB_FILE_BYTES:
            raise ValueError(f"larger than {MAX_JOB_FILE_BYTES >> 20} MiB")
        return loads_bounded(data)
    except FileNotFoundError:
        return default
    except (OSError, ValueError) as exc:
        raise SpoolError(one_line(f"{path}: unreadable ({str(exc)[:120]})")) from None


def _number(name: str, plan_name: str) -> int:
    head, _, tail = name.rpartition("-")
    return int(tail) if head == plan_name and tail.isdigit() else 0


def _user() -> str:
    try:
        return getpass.getuser()
    except (KeyError, OSError):
        return str(os.getuid())


def new_job_uid() -> str:
    """A unique, time-ordered job identity: a version 7 UUID (RFC 9562: 48-bit Unix time
    in milliseconds, then 74 random bits)."""
    value = (time.time_ns() // 1_000_000 & (1 << 48) - 1) << 80
    value |= int.from_bytes(os.urandom(10), "big")
    value = (value & ~(0xF << 76)) | (0x7 << 76)  # version 7
    value = (value & ~(0x3 << 62)) | (0x2 << 62)  # RFC variant
    return str(uuid.UUID(int=value))


def valid_job_id(text: str) -> bool:
    return bool(_JOB_ID.match(text))
