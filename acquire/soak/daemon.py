"""``sweepd serve``: run the spool's jobs, one thread per job, one job per instrument.

The daemon holds the spool's lock (one daemon per spool), looks at the jobs folder a few
times a second, and starts a worker for each queued or interrupted job whose instrument
is free; jobs for the same instrument wait their turn in submission order, jobs for
different instruments run side by side. SIGTERM and SIGINT ask every worker to stop after
the sweep in flight; each journals the stop and the job resumes on its schedule when the
daemon starts again. Nothing listens on any socket: all control goes through the spool's
files, which are private to the user.
"""

from __future__ import annotations

import contextlib
import logging
import os
import signal
import sys
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass

from acquire.instruments import Instruments
from acquire.soak.ownership import OwnershipError
from acquire.soak.progress import progress_line
from acquire.soak.spool import ACTIVE_STATES, Job, Spool, SpoolError
from acquire.soak.worker import SoakWorker, StopSignal
from drivers.resources import resource_key

log = logging.getLogger(__name__)

POLL_S = 0.2
PROGRESS_EVERY_S = 10.0
STOP_JOIN_S = 120.0  # longest wait for workers to finish their sweep after a stop


@dataclass
class _Running:
    job: Job
    worker: SoakWorker
    thread: threading.Thread


class Daemon:
    """The job runner behind ``sweepd serve``."""

    def __init__(self, spool: Spool, *, until_idle: bool = False,
                 progress: bool | None = None, poll_s: float = POLL_S,
                 instruments: Instruments | None = None) -> None:
        self.spool = spool
        self.instruments = instruments  # shared with the HTTP service, when it runs
        self.until_idle = until_idle
        self.poll_s = poll_s
        self.progress = sys.stderr.isatty() if progress is None else progress
        self.stop = StopSignal()
        self.running: dict[str, _Running] = {}
        self._settled: set[str] = set()  # jobs seen in a final state: never looked at again
        self._progress_at = 0.0

    def serve(self) -> int:
        """Run until a signal (or, with ``until_idle``, until no job is left)."""
        os.umask(0o077)
        self.spool.ensure()
        lock = self.spool.lock()
        # ``sweepd status`` probes the lock for an instant; do not mistake that for a daemon
        for _ in range(10):
            if lock.try_acquire():
                break
            time.sleep(0.1)
        else:
            pid = self.spool.daemon_pid()
            raise SpoolError(f"spool {self.spool.root}: another sweepd serve (pid {pid}) is "
                             "already running on it")
        restore = self._install_signals()
        try:
            log.info("serving spool %s (pid %d)", self.spool.root, os.getpid())
            while not self.stop.is_set():
                self.tick()
                if self.until_idle and not self.running and not self._waiting():
                    log.info("no job left to run; exiting (--until-idle)")
                    break
                self._show_progress()
                self.stop.wait(self.poll_s)
            self._shutdown()
        finally:
            restore()
            lock.release()
        return 0

    # -- one look at the spool --------------------------------------------------------------
    def tick(self) -> None:
        self._reap()
        busy = {resource_key(r.job.resource) for r in self.running.values()}
        for job in self.spool.jobs():
            if job.id in self.running or job.id in self._settled:
                continue
            try:
                job.check_trusted()
                state = job.read_state().get("state", "queued")
            except OwnershipError as exc:
                log.error("%s; the job is not run", exc)
                self._settled.add(job.id)
                continue
            except SpoolError as exc:
                log.error("%s", exc)
                continue
            if state not in ACTIVE_STATES:
                self._settled.add(job.id)
                continue
            if state == "queued" and job.cancel_requested:
                job.write_state(state="cancelled", reason="cancelled before it started")
                log.info("job %s: cancelled before it started", job.id)
                continue
            key = resource_key(job.resource)
            if key in busy:
                continue
            if self.instruments is not None and not self.instruments.try_hold(
                    job.resource, f"soak job {job.id}"):
                continue  # a measurement through the service holds it: next look
            busy.add(key)
            self._start(job)

    def _waiting(self) -> bool:
        for job in self.spool.jobs():
            if job.id in self._settled:
                continue
            try:
                if job.read_state().get("state") in ACTIVE_STATES:
                    return True
            except SpoolError:
                continue
        return False

    def _start(self, job: Job) -> None:
        worker = SoakWorker(job, self.stop)
        thread = threading.Thread(target=self._run_worker, args=(worker,),
                                  name=f"soak-{job.id}", daemon=True)
        self.running[job.id] = _Running(job, worker, thread)
        log.info("job %s: starting on %s", job.id, job.resource)
        thread.start()

    def _run_worker(self, worker: SoakWorker) -> None:
        try:
            worker.run()
        except Exception as exc:  # a bug, not a user error: keep the daemon and other jobs
            log.exception("job %s: internal error, job marked failed", worker.job.id)
            with contextlib.suppress(Exception):  # the log line above says what happened
                worker.job.write_state(state="failed",
                                       reason=f"internal error: {type(exc).__name__}: {exc}")

    def _reap(self) -> None:
        for job_id, entry in list(self.running.items()):
            if not entry.thread.is_alive():
                entry.thread.join()
                del self.running[job_id]
                if self.instruments is not None:
                    self.instruments.release(entry.job.resource)

    # -- stopping ----------------------------------------------------------------------------
    def _install_signals(self) -> Callable[[], None]:
        if threading.current_thread() is not threading.main_thread():
            return lambda: None
        previous = {}
        for sig in (signal.SIGTERM, signal.SIGINT):
            previous[sig] = signal.signal(sig, self._on_signal)

        def restore() -> None:
            for sig, handler in previous.items():
                signal.signal(sig, handler)

        return restore

    def _on_signal(self, signum: int, _frame: object) -> None:
        name = signal.Signals(signum).name
        if self.stop.is_set():
            log.warning("%s again: still waiting for the sweeps in flight", name)
            return
        log.info("%s: stopping after the sweeps in flight", name)
        self.stop.set(name)

    def _shutdown(self) -> None:
        if not self.stop.is_set():
            self.stop.set("idle")
        deadline = time.monotonic() + STOP_JOIN_S
        for entry in list(self.running.values()):
            entry.thread.join(max(0.0, deadline - time.monotonic()))
            if entry.thread.is_alive():
                log.error("job %s: worker did not stop in %.0f s", entry.job.id, STOP_JOIN_S)
        self._reap()
        log.info("stopped")

    # -- progress on a terminal ------------------------------------------------------------
    def _show_progress(self) -> None:
        if not self.progress or not self.running:
            return
        now = time.monotonic()
        if now - self._progress_at < PROGRESS_EVERY_S:
            return
        self._progress_at = now
        for entry in self.running.values():
            try:
                status = entry.job.read_status()
            except SpoolError:
                continue
            print(progress_line(entry.job.id, status), file=sys.stderr, flush=True)
