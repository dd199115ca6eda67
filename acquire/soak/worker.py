"""One soak job on one instrument: the schedule loop, retries and faults; it drives the parts.

Each sweep index ``k`` ends in exactly one journal row of the job's run: ``stored`` (kept
as Touchstone + JSON summary), ``measured`` (metrics journalled, data not kept by the
plan), ``missed`` (due but not taken, with the reason) or ``failed`` (taken but could not
be written). Kept sweeps are journalled ``pending`` first, written atomically, then
marked ``stored``; after a kill the pending row is settled by the file (adopted when it
exists, else missed), so files and journal agree and no index is taken twice.

Faults (timeouts, dropped links, bad replies, SCPI error queue entries, a restarted
instrument) are journalled with the action taken: the sweep in flight is discarded and
retried while its slot lasts (``faults.retries``), else recorded as missed; the link is
reopened with bounded exponential backoff and the settings read back before the next
sweep.
"""

from __future__ import annotations

import dataclasses
import logging
import math
import os
from typing import Any

from acquire.capture.calchoice import cal_dir_for
from acquire.capture.judge import Capture, capture
from acquire.errors import JournalError
from acquire.journal import JournalStore, journal_in
from acquire.soak import history
from acquire.soak.alarm_log import AlarmLog
from acquire.soak.alarms import AlarmBook
from acquire.soak.devfile import DeviationFile
from acquire.soak.diskhold import (
    DiskGuard,
    Hold,
    disk_full,
    pause_for_disk,
    resume_after_disk,
)
from acquire.soak.drift import Reference, make_reference, measure_drift, reference_from_file
from acquire.soak.ending import GiveUp, StopSignal, fail_job, finish_job
from acquire.soak.link import Backoff, InstrumentLink, fault_kind
from acquire.soak.ownership import check_job_paths
from acquire.soak.resume import restore_counts, restore_progress, settle_interrupted
from acquire.soak.rows import SweepRows, keep_reasons
from acquire.soak.spec import SoakSpec, parse_soak
from acquire.soak.spool import Job
from acquire.soak.status_writer import StatusWriter, status_document
from acquire.soak.timeline import Clock, Timeline
from acquire.soak.tracker import DriftTracker
from acquire.storage import sweep_stale_temps
from acquire.utc import utc_text
from drivers.errors import InstrumentError, ScpiErrorQueue, SweepdError

log = logging.getLogger(__name__)

POLL_S = 0.1  # how often waits look at stop and cancel requests
HOLD_POLL_S = 1.0  # how often a held job looks at the free disk space again
OVERRUN = "not taken: the sweep before it (or reconnecting) ran past this sweep's slot"


class SoakWorker:
    """Runs one job until it finishes, is cancelled, fails, or the daemon stops."""

    def __init__(self, job: Job, stop: StopSignal | None = None, *,
                 clock: Clock | None = None) -> None:
        self.job = job
        self.stop = stop or StopSignal()
        self.clock = clock or Clock()
        self.journal: JournalStore | None = None
        self.link: InstrumentLink | None = None
        self.devfile: DeviationFile | None = None
        self.reference: Reference | None = None
        self.run_id = 0
        self.tally: dict[str, int] = {}
        self.last_fault: dict[str, Any] | None = None
        self.last_sweep: dict[str, Any] | None = None
        self.state = "running"
        self.reason: str | None = None
        self.next_index = 0
        self.gap_reason = OVERRUN
        self.hold: Hold | None = None
        self._retry_at = -math.inf
        self.prepared = False

    # -- life cycle -----------------------------------------------------------------------
    def run(self) -> str:
        """Run the job; returns the job's state afterwards (running if the daemon stops)."""
        try:
            self._prepare()
            outcome = self._loop()
            finish_job(self, outcome)
        except SweepdError as exc:
            fail_job(self, exc)
        finally:
            self._close()
        return self.state

    def _prepare(self) -> None:
        job = self.job
        plan = job.load_plan()
        self.spec: SoakSpec = parse_soak(plan)
        self.disk = DiskGuard(job.data_dir, self.spec.disk_reserve_bytes)
        if "{index}" not in plan.output.name:
            plan = dataclasses.replace(plan, output=dataclasses.replace(
                plan.output, name=plan.output.name + "-{index}"))
        self.plan = plan
        check_job_paths(job.output_dir, job.data_dir, cal_dir_for(plan),
                        self.spec.alarms.command)
        job.claim_data_dir()
        sweep_stale_temps(job.data_dir)
        self.journal = journal = journal_in(job.output_dir, location=plan.output.journal)
        state = job.read_state()
        run = history.find_run(journal, job)
        now = self.clock.now()
        if run is None:
            self.run_id = journal.start_run("soak", plan.name, plan_path=str(job.plan_source),
                                            resource=job.resource, job_id=job.id,
                                            job_uid=job.uid or None)
        else:
            self.run_id = int(run["id"])
        start = float(state.get("start_epoch") or now)
        self.timeline = Timeline(self.spec.schedule, start)
        self.tracker = DriftTracker(start, self.timeline.every, self.spec.minimums)
        self.status_writer = StatusWriter(self)
        if run is not None:
            # journal the resumption before this process shows itself as the job's owner,
            # so that every start that may be killed has left its record
            settle_interrupted(self)
        job.write_state(state="running", run_id=self.run_id, start_epoch=start,
                        started_utc=state.get("started_utc") or utc_text(), reason=None,
                        pid=os.getpid())
        restore_counts(self)
        self.rows = SweepRows(journal, self.run_id, plan, job.data_dir, job.id, self.tally,
                              self.disk, self._fault)
        persisted = sorted(state.get("alarms_active", []))
        self.alarms = AlarmBook(self.spec.alarms, job.id, set(persisted),
                                on_command_failure=self._alarm_command_failed)
        self.alarm_log = AlarmLog(self.alarms, journal, self.run_id, job, persisted,
                                  len(history.alarms(journal, self.run_id)))
        restore_progress(self)
        self.link = InstrumentLink(plan, job.resource)
        self.backoff = Backoff(self.spec.faults.backoff_first_s, self.spec.faults.backoff_max_s)
        self.prepared = True
        log.info("job %s: %s run %d at sweep %d (%s)", job.id,
                 "resuming" if run is not None else "starting", self.run_id, self.next_index,
                 job.resource)

    def _close(self) -> None:
        if self.link is not None:
            self.link.close()
        if self.devfile is not None:
            self.devfile.sync()
            self.devfile.close()
        if self.journal is not None:
            self.journal.close()

    # -- the loop -------------------------------------------------------------------------
    def _loop(self) -> str:
        k = self.next_index
        timeline, schedule = self.timeline, self.spec.schedule
        total = schedule.total()
        while True:
            why = self._stop_reason()
            if why:
                return why
            now = self.clock.now()
            if timeline.every > 0:
                current = timeline.current_index(now)
                upto = current if total is None else min(current, total)
                if upto > k:
                    if self.hold is None:
                        self.rows.missed(k, upto, self.gap_reason)
                    else:  # covered by the open hold: no row per sweep
                        self.rows.count("missed", upto - k)
                    k = upto
            self.next_index = k
            if not timeline.in_plan(k, now):
                return "finished"
            low = self.disk.low()
            if low:
                if self.hold is None:
                    pause_for_disk(self, low)
                self.stop.wait(min(HOLD_POLL_S, max(0.0, timeline.slot_end(k) - now)))
                continue
            if self.hold is not None:
                resume_after_disk(self)
            try:
                if not self._wait_until(timeline.due(k)) or not self._take(k):
                    continue  # a stop or cancel came first: the loop's top ends the job
            except JournalError as exc:
                if not disk_full(exc):
                    raise
                self.disk.full_at = self.disk.free_bytes()  # hold until space is freed
                k = self.next_index = max(k, history.counts(self.journal, self.run_id).next_seq)
                continue
            k += 1
            self.next_index = k
            self.write_status()

    def _take(self, k: int) -> bool:
        """Sweep ``k``: recorded (taken or missed), or False when a stop came first."""
        link = self.link
        assert link is not None
        retries = self.spec.faults.retries
        slot_end = self.timeline.slot_end(k)
        attempts = 0
        problem = "its slot passed"
        while True:
            if self._stop_reason():
                return False
            now = self.clock.now()
            if now >= slot_end:
                self.rows.missed(k, k + 1, f"not taken: {problem}")
                return True
            ready, trouble = self._get_ready(k, now, slot_end)
            if not ready:
                problem = trouble or problem
                continue
            started = self.clock.now()
            try:
                cap = capture(link.session, link.cal, soak_job=self.job.id, soak_index=k)
                link.session.check_errors(f"after sweep {k}")
            except InstrumentError as exc:
                attempts += 1
                link.mark_suspect(reopen=not isinstance(exc, ScpiErrorQueue))
                again = attempts <= retries and self.clock.now() < slot_end
                action = (f"sweep {k} discarded; retrying (attempt {attempts + 1} of "
                          f"{retries + 1})" if again
                          else f"sweep {k} discarded; recorded as missed")
                self._fault(exc, k, action)
                problem = f"{fault_kind(exc)} on every attempt"
                if not again:
                    self.rows.missed(k, k + 1, f"not taken: {fault_kind(exc)}: {exc}")
                    return True
                continue
            self._record(k, cap, started)
            self.gap_reason = OVERRUN
            return True

    def _get_ready(self, k: int, now: float, slot_end: float) -> tuple[bool, str | None]:
        """Make the link ready for sweep ``k``: (ready, why not when a try just failed)."""
        link = self.link
        assert link is not None
        if link.ready:
            return True, None
        if now < self._retry_at:  # backing off: wait (stop and cancel still heard)
            self._wait_until(min(self._retry_at, slot_end))
            return False, None
        try:
            ready = link.make_ready(self._note)
        except InstrumentError as exc:
            delay = self.backoff.fail(now)
            self._retry_at = now + delay
            link.mark_suspect()
            self._fault(exc, k, f"instrument not ready; next try in {delay:.3g} s "
                                f"(try {self.backoff.failures})")
            self._check_give_up(now)
            return False, f"instrument not ready ({fault_kind(exc)})"
        if self.backoff.failures:
            tries = self.backoff.failures
            self.journal_fault(
                "reconnected", f"instrument {link.resource}: ready again after "
                f"{tries} failed tr{'y' if tries == 1 else 'ies'}",
                f"sweeping again from sweep {k}", k)
        elif ready.opened:
            log.info("job %s: connected to %s", self.job.id, link.resource)
        self.backoff.reset()
        return True, None

    # -- recording -------------------------------------------------------------------------
    def _record(self, k: int, cap: Capture, started: float) -> None:
        spec = self.spec
        first = False
        if self.reference is None:
            if spec.reference is not None:
                self.reference = reference_from_file(spec.reference, spec.parameter,
                                                     spec.band_hz, cap.sweep.freq_hz)
            else:
                first = True
                self.reference = make_reference(cap.sweep, spec.parameter, spec.band_hz,
                                                f"sweep {k}")
        drift, delta_db, delta_deg = measure_drift(self.reference, cap.sweep)
        values = {name: drift.metric(name) for name in self.alarms.watched}
        raised, over = self.alarms.check(k, values)
        reasons = keep_reasons(spec.keep, k, cap, over, first)
        soak = {**drift.to_dict(), "t_s": round(started - self.timeline.start, 6),
                "kept": reasons}
        cap.verdict = dataclasses.replace(cap.verdict, metrics={**cap.verdict.metrics,
                                                                "soak": soak})
        self.deviation_file().append(k, delta_db, delta_deg)
        if reasons:
            kept = self.rows.store(k, cap)
            if first and not kept:
                self.reference = None  # the next good sweep becomes the reference
        else:
            self.rows.measured(k, cap)
        self.alarm_log.journal_raised(k, raised)
        self.alarm_log.persist()
        self.tracker.latest = drift
        self.tracker.track(k, drift, started)
        self.update_allan(k)
        self.last_sweep = {"index": k, "utc": utc_text(), "verdict": cap.verdict.verdict
                           if cap.verdict.results else None, "kept": bool(reasons)}

    # -- faults ------------------------------------------------------------------------------
    def _fault(self, exc: BaseException, seq: int | None, action: str) -> None:
        self.journal_fault(fault_kind(exc), str(exc), action, seq)

    def _note(self, kind: str, message: str, action: str) -> None:
        self.journal_fault(kind, message, action, self.next_index)

    def journal_fault(self, kind: str, message: str, action: str,
                       seq: int | None = None) -> None:
        message = " ".join(message.split())
        if self.journal is not None and self.run_id:
            try:
                self.journal.record_fault(self.run_id, kind, message, action=action, seq=seq)
            except JournalError as exc:  # the log keeps it; the hold that follows waits
                if not disk_full(exc):
                    raise
                self.disk.mark_full()
                log.error("job %s: fault not journalled: %s", self.job.id, exc)
        self.last_fault = {"utc": utc_text(), "seq": seq, "kind": kind, "message": message,
                           "action": action}
        log.warning("job %s: %s: %s -> %s", self.job.id, kind, message, action)
        self.write_status(force=True)

    def _alarm_command_failed(self, problem: str) -> None:
        self.journal_fault("alarm-command", problem, "alarm journalled and logged anyway")

    def _check_give_up(self, now: float) -> None:
        limit = self.spec.faults.give_up_s
        since = self.backoff.since
        if limit is not None and since is not None and now - since > limit:
            raise GiveUp(f"job {self.job.id}: instrument {self.job.resource} not ready for "
                         f"{now - since:.0f} s (faults.give_up is {limit:g} s)")

    # -- waiting and stopping ----------------------------------------------------------------
    def _stop_reason(self) -> str | None:
        if self.job.cancel_requested:
            return "cancelled"
        if self.stop.is_set():
            return "stopped"
        return None

    def _wait_until(self, when: float) -> bool:
        """Sleep until ``when``; False if a stop or cancel came first."""
        while True:
            if self._stop_reason():
                return False
            left = when - self.clock.now()
            if left <= 0:
                return True
            self.write_status()
            self.stop.wait(min(POLL_S, left))

    # -- drift, alarms, status ------------------------------------------------------------
    def deviation_file(self) -> DeviationFile:
        """The job's deviation file, opened (and repaired) at first use."""
        if self.devfile is None:
            assert self.reference is not None
            self.devfile = DeviationFile(self.job.data_dir, self.reference.freq_hz)
            self.devfile.repair()
        return self.devfile

    def update_allan(self, k: int, force: bool = False) -> None:
        """Recompute the Allan deviation when due and check its alarm at sweep ``k``."""
        worst = self.tracker.update_allan(self.next_index + 1, self.clock.now(), force)
        if worst is None or self.spec.alarms.resonance_adev_hz is None:
            return
        raised, _ = self.alarms.check(k, {"resonance_adev_hz": worst})
        self.alarm_log.persist()
        self.alarm_log.journal_raised(k, raised)

    def write_status(self, force: bool = False) -> None:
        """Rewrite the status file when due (always when forced), once the job is prepared."""
        if self.prepared:
            self.status_writer.write(self.clock.now(), force)

    def status_dict(self, now: float) -> dict[str, Any]:
        """The status file's content at epoch ``now``."""
        return status_document(self, now)
