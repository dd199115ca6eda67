"""One soak job on one instrument: the sweep loop, faults, drift, alarms, status.

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

import contextlib
import dataclasses
import errno
import logging
import math
import os
import shutil
import threading
from pathlib import Path
from typing import Any

import numpy as np

from acquire.capture.calchoice import cal_dir_for
from acquire.capture.files import Stored, plan_path, store
from acquire.capture.judge import Capture, capture
from acquire.capture.records import journal_stored, stored_fields, worst_margin
from acquire.errors import JournalError
from acquire.journal import JOURNAL_NAME, JournalStore, journal_in
from acquire.jsonclean import json_safe, json_text
from acquire.soak import history
from acquire.soak.alarms import AlarmBook
from acquire.soak.allan import AllanPoint
from acquire.soak.devfile import DeviationFile
from acquire.soak.drift import (
    Reference,
    SweepDrift,
    make_reference,
    measure_drift,
    reference_from_file,
)
from acquire.soak.link import Backoff, InstrumentLink, fault_kind
from acquire.soak.ownership import check_job_paths
from acquire.soak.spec import SoakSpec, parse_soak
from acquire.soak.spool import Job
from acquire.soak.statistics import allan_points
from acquire.soak.timeline import Clock, Timeline
from acquire.storage import sweep_stale_temps
from acquire.utc import epoch_text, parse_utc, utc_text
from drivers.errors import InstrumentError, ScpiErrorQueue, SweepdError

log = logging.getLogger(__name__)

STATUS_EVERY_S = 0.5  # the status file is rewritten at most this often while sweeping
ALLAN_EVERY_S = 2.0  # the Allan deviation is recomputed at most this often
POLL_S = 0.1  # how often waits look at stop and cancel requests
HOLD_POLL_S = 1.0  # how often a held job looks at the free disk space again
FREED_BYTES = 1 << 20  # after a failed write, this much more free space ends the hold
OVERRUN = "not taken: the sweep before it (or reconnecting) ran past this sweep's slot"


class GiveUp(SweepdError):
    """The instrument stayed unreachable for longer than the plan's ``faults.give_up``."""


class StopSignal:
    """The daemon's request to stop every job, with its cause (e.g. ``SIGTERM``)."""

    def __init__(self) -> None:
        self.event = threading.Event()
        self.cause = ""

    def set(self, cause: str) -> None:
        self.cause = self.cause or cause
        self.event.set()

    def is_set(self) -> bool:
        return self.event.is_set()

    def wait(self, seconds: float) -> bool:
        return self.event.wait(seconds)


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
        self.latest: SweepDrift | None = None
        self.worst: dict[str, float] = {}
        self.alarm_count = 0
        self.last_alarm: dict[str, Any] | None = None
        self.allan: list[AllanPoint] = []
        self.stats_note: str | None = "not enough data (no sweep yet)"
        self.state = "running"
        self.reason: str | None = None
        self.next_index = 0
        self._gap_reason = OVERRUN
        self.hold: dict[str, Any] | None = None
        self._full_at: int | None = None
        self._status_at = -math.inf
        self._allan_at = -math.inf
        self._retry_at = -math.inf
        self._resonance = np.full(1024, np.nan)
        self._t_s = np.full(1024, np.nan)
        self._prepared = False

    # -- life cycle -----------------------------------------------------------------------
    def run(self) -> str:
        """Run the job; returns the job's state afterwards (running if the daemon stops)."""
        try:
            self._prepare()
            outcome = self._loop()
            self._finish(outcome)
        except SweepdError as exc:
            self._fail(exc)
        finally:
            self._close()
        return self.state

    def _prepare(self) -> None:
        job = self.job
        plan = job.load_plan()
        self.spec: SoakSpec = parse_soak(plan)
        if "{index}" not in plan.output.name:
            plan = dataclasses.replace(plan, output=dataclasses.replace(
                plan.output, name=plan.output.name + "-{index}"))
        self.plan = plan
        check_job_paths(job.output_dir, job.data_dir, cal_dir_for(plan),
                        self.spec.alarms.command)
        job.claim_data_dir()
        sweep_stale_temps(job.data_dir)
        self.journal = journal = journal_in(job.output_dir)
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
        adopted: list[int] = []
        if run is not None:
            # journal the resumption before this process shows itself as the job's owner,
            # so that every start that may be killed has left its record
            settled = journal.reconcile(run_id=self.run_id)
            adopted = [mid for mid, new in settled if new == "stored"]
            self._gap_reason = "not taken: sweepd serve was not running"
            self._journal_fault("restart", f"job resumed by sweepd serve (pid {os.getpid()}) "
                                f"after an interruption; {len(settled)} sweep(s) in flight "
                                f"settled ({len(adopted)} adopted from complete files)",
                                "resumed on its schedule")
        job.write_state(state="running", run_id=self.run_id, start_epoch=start,
                        started_utc=state.get("started_utc") or utc_text(), reason=None,
                        pid=os.getpid())
        self._resume_counts(journal)
        self._persisted_alarms = sorted(state.get("alarms_active", []))
        self.alarms = AlarmBook(self.spec.alarms, job.id, set(self._persisted_alarms),
                                on_command_failure=self._alarm_command_failed)
        self.alarm_count = len(history.alarms(journal, self.run_id))
        self._load_reference()
        # stored rows without metrics: adopted now, or adopted by an earlier start that was
        # itself killed before it could fill them in
        unfilled = [r for r in journal.run_measurements(self.run_id, ("stored",))
                    if r["metrics_json"] is None]
        if unfilled:
            self._fill_adopted(unfilled)
        self._load_series()
        self.link = InstrumentLink(plan, job.resource)
        self.backoff = Backoff(self.spec.faults.backoff_first_s, self.spec.faults.backoff_max_s)
        self._prepared = True
        log.info("job %s: %s run %d at sweep %d (%s)", job.id,
                 "resuming" if run is not None else "starting", self.run_id, self.next_index,
                 job.resource)

    def _resume_counts(self, journal: JournalStore) -> None:
        """Counters, the next index and a hold left open by a stop, from the journal."""
        counts = history.counts(journal, self.run_id)
        self.tally = {**counts.by_state, "missed": counts.missed}
        self.next_index = counts.next_seq
        held = history.open_hold(journal, self.run_id)
        if held is None:
            return
        # stopped while held: the same hold goes on until space returns
        reason = str(held["reason"])
        self.hold = {"id": int(held["id"]), "first_seq": int(held["first_seq"]),
                     "reason": reason}
        self.next_index = max(self.next_index, self.hold["first_seq"])
        self.state, self.reason = "held", reason
        self.job.write_state(state="held", reason=reason)

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
                        self._missed_range(k, upto, self._gap_reason)
                    else:  # covered by the open hold: no row per sweep
                        self._count("missed", upto - k)
                    k = upto
            self.next_index = k
            if not timeline.in_plan(k, now):
                return "finished"
            low = self._disk_low()
            if low:
                if self.hold is None:
                    self._hold(low)
                self.stop.wait(min(HOLD_POLL_S, max(0.0, timeline.slot_end(k) - now)))
                continue
            if self.hold is not None:
                self._unhold()
            try:
                if not self._wait_until(timeline.due(k)) or not self._take(k):
                    continue  # a stop or cancel came first: the loop's top ends the job
            except JournalError as exc:
                if not disk_full(exc):
                    raise
                self._full_at = self._free_bytes()  # hold until space is freed
                k = self.next_index = max(k, history.counts(self.journal, self.run_id).next_seq)
                continue
            k += 1
            self.next_index = k
            self._status()

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
                self._missed_range(k, k + 1, f"not taken: {problem}")
                return True
            if not link.ready:
                if now < self._retry_at:
                    self._wait_until(min(self._retry_at, slot_end))
                    continue
                try:
                    ready = link.make_ready(self._note)
                except InstrumentError as exc:
                    delay = self.backoff.fail(now)
                    self._retry_at = now + delay
                    link.mark_suspect()
                    self._fault(exc, k, f"instrument not ready; next try in {delay:.3g} s "
                                        f"(try {self.backoff.failures})")
                    problem = f"instrument not ready ({fault_kind(exc)})"
                    self._check_give_up(now)
                    continue
                if self.backoff.failures:
                    tries = self.backoff.failures
                    self._journal_fault(
                        "reconnected", f"instrument {link.resource}: ready again after "
                        f"{tries} failed tr{'y' if tries == 1 else 'ies'}",
                        f"sweeping again from sweep {k}", k)
                elif ready.opened:
                    log.info("job %s: connected to %s", self.job.id, link.resource)
                self.backoff.reset()
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
                    self._missed_range(k, k + 1, f"not taken: {fault_kind(exc)}: {exc}")
                    return True
                continue
            self._record(k, cap, started)
            self._gap_reason = OVERRUN
            return True

    # -- recording -------------------------------------------------------------------------
    def _record(self, k: int, cap: Capture, started: float) -> None:
        spec, journal = self.spec, self.journal
        assert journal is not None
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
        reasons = self._keep_reasons(k, cap, over, first)
        soak = {**drift.to_dict(), "t_s": round(started - self.timeline.start, 6),
                "kept": reasons}
        cap.verdict = dataclasses.replace(cap.verdict, metrics={**cap.verdict.metrics,
                                                                "soak": soak})
        self._devfile().append(k, delta_db, delta_deg)
        if reasons:
            kept = self._store(k, cap)
            if first and not kept:
                self.reference = None  # the next good sweep becomes the reference
        else:
            verdict = cap.verdict
            journal.record_measured(self.run_id, k, stored_fields(
                cap, note=verdict.summary_line() if verdict.results else None,
                with_verdict_json=False))
            self._count("measured")
        for alarm in raised:
            journal.record_alarm(self.run_id, alarm.metric, alarm.message, seq=k,
                                 value=alarm.value, threshold=alarm.threshold)
            self.alarm_count += 1
            self.last_alarm = {"seq": k, "utc": utc_text(), "metric": alarm.metric,
                               "value": alarm.value, "threshold": alarm.threshold,
                               "message": alarm.message}
        self._persist_alarms()
        self.latest = drift
        self._track(k, drift, started)
        self.last_sweep = {"index": k, "utc": utc_text(), "verdict": cap.verdict.verdict
                           if cap.verdict.results else None, "kept": bool(reasons)}

    def _persist_alarms(self) -> None:
        """Keep the active alarms in the job state, so a restart does not raise them again."""
        active = sorted(self.alarms.active)
        if active != self._persisted_alarms:
            self.job.write_state(alarms_active=active)
            self._persisted_alarms = active

    def _keep_reasons(self, k: int, cap: Capture, over: set[str], first: bool) -> list[str]:
        keep = self.spec.keep
        reasons = []
        if first:
            reasons.append("reference")
        if k % keep.every == 0:
            reasons.append("every sweep" if keep.every == 1 else f"every {keep.every}th")
        verdict = cap.verdict
        if keep.failing and verdict.results and verdict.verdict != "pass":
            reasons.append(verdict.verdict)
        if keep.over_threshold and over:
            reasons.append("over " + ", ".join(sorted(over)))
        return reasons

    def _store(self, k: int, cap: Capture) -> bool:
        journal = self.journal
        assert journal is not None
        planned = journal.plan_measurement(self.run_id, k,
                                           plan_path(cap, self.plan, self.job.data_dir, index=k))
        try:
            stored = store(cap, self.plan, planned.touchstone)
        except (SweepdError, OSError) as exc:
            if planned.touchstone.is_file():  # the data file is complete; its summary is not
                journal_stored(journal, planned, cap, Stored(planned.touchstone, None))
                self._count("stored")
                self._fault(exc, k, "Touchstone kept, summary not written")
                return True
            with contextlib.suppress(JournalError):  # a full disk may refuse this too
                journal.fail_measurement(planned, f"not written: {exc}")
            self._count("failed")
            if (isinstance(exc, OSError) and exc.errno == errno.ENOSPC) or disk_full(exc):
                self._full_at = self._free_bytes() or 0
            self._fault(exc, k, f"sweep {k} not written (state failed); checking disk space")
            return False
        journal_stored(journal, planned, cap, stored)
        self._count("stored")
        return True

    def _missed_range(self, lo: int, hi: int, reason: str) -> None:
        """Journal sweeps ``lo .. hi-1`` as missed, in one transaction."""
        if hi <= lo:
            return
        journal = self.journal
        assert journal is not None
        added = journal.record_missed(self.run_id, range(lo, hi), reason)
        self._count("missed", added)
        span = f"sweep {lo}" if hi == lo + 1 else f"sweeps {lo}..{hi - 1}"
        log.warning("job %s: %s missed: %s", self.job.id, span, reason)

    def _count(self, state: str, n: int = 1) -> None:
        self.tally[state] = self.tally.get(state, 0) + n

    # -- faults ------------------------------------------------------------------------------
    def _fault(self, exc: BaseException, seq: int | None, action: str) -> None:
        self._journal_fault(fault_kind(exc), str(exc), action, seq)

    def _note(self, kind: str, message: str, action: str) -> None:
        self._journal_fault(kind, message, action, self.next_index)

    def _journal_fault(self, kind: str, message: str, action: str,
                       seq: int | None = None) -> None:
        message = " ".join(message.split())
        if self.journal is not None and self.run_id:
            try:
                self.journal.record_fault(self.run_id, kind, message, action=action, seq=seq)
            except JournalError as exc:  # the log keeps it; the hold that follows waits
                if not disk_full(exc):
                    raise
                self._full_at = self._free_bytes() or 0
                log.error("job %s: fault not journalled: %s", self.job.id, exc)
        self.last_fault = {"utc": utc_text(), "seq": seq, "kind": kind, "message": message,
                           "action": action}
        log.warning("job %s: %s: %s -> %s", self.job.id, kind, message, action)
        self._status(force=True)

    def _alarm_command_failed(self, problem: str) -> None:
        self._journal_fault("alarm-command", problem, "alarm journalled and logged anyway")

    def _check_give_up(self, now: float) -> None:
        limit = self.spec.faults.give_up_s
        since = self.backoff.since
        if limit is not None and since is not None and now - since > limit:
            raise GiveUp(f"job {self.job.id}: instrument {self.job.resource} not ready for "
                         f"{now - since:.0f} s (faults.give_up is {limit:g} s)")

    # -- disk ----------------------------------------------------------------------------------
    def _disk_low(self) -> str | None:
        try:
            free = shutil.disk_usage(self.job.data_dir).free
        except OSError as exc:
            return f"cannot check free space in {self.job.data_dir}: {exc.strerror}"
        reserve = self.spec.disk_reserve_bytes
        if free < reserve:
            return (f"disk nearly full: {free / 1e6:.1f} MB free in {self.job.data_dir}, "
                    f"soak.disk_reserve is {reserve / 1e6:.1f} MB")
        if self._full_at is not None:  # a write found the disk full below the reserve
            if free <= self._full_at + FREED_BYTES:
                return (f"disk full: a write failed with {free / 1e6:.2f} MB free in "
                        f"{self.job.data_dir}")
            self._full_at = None
        return None

    def _free_bytes(self) -> int | None:
        try:
            return shutil.disk_usage(self.job.data_dir).free
        except OSError:
            return None

    def _hold(self, why: str) -> None:
        """Stop taking sweeps until space returns: one hold journalled, no row per sweep."""
        self.state, self.reason = "held", why
        self.job.write_state(state="held", reason=why)
        self._journal_fault("disk-full", why, "capturing paused before any data is damaged; "
                            "resumes by itself when space is freed", self.next_index)
        assert self.journal is not None
        self.hold = {"id": -1, "first_seq": self.next_index, "reason": why}
        try:
            self.hold["id"] = self.journal.start_hold(self.run_id, self.next_index, why)
        except JournalError as exc:  # no room even for that: journalled when space returns
            if not disk_full(exc):
                raise

    def _unhold(self) -> None:
        assert self.journal is not None and self.hold is not None
        first, last = self.hold["first_seq"], self.next_index - 1
        if self.hold["id"] < 0:
            self.hold["id"] = self.journal.start_hold(self.run_id, first, self.hold["reason"])
        self.journal.end_hold(self.hold["id"], last)
        self.hold = None
        self.state, self.reason = "running", None
        self.job.write_state(state="running", reason=None)
        skipped = max(0, last - first + 1)
        self._journal_fault("disk-ok", f"free disk space is back; {skipped} sweep(s) not "
                            "taken while held", "capturing resumed", self.next_index)

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
            self._status()
            self.stop.wait(min(POLL_S, left))

    def _finish(self, outcome: str) -> None:
        journal = self.journal
        assert journal is not None
        self._update_allan(max(0, self.next_index - 1), force=True)
        if self.hold is not None and outcome != "stopped":
            if self.hold["id"] < 0:
                self.hold["id"] = journal.start_hold(self.run_id, self.hold["first_seq"],
                                                     self.hold["reason"])
            journal.end_hold(self.hold["id"], self.next_index - 1)
            self.hold = None
        if outcome == "finished":
            journal.end_run(self.run_id, "finished")
            self.state, self.reason = "finished", None
            self.job.write_state(state="finished", ended_utc=utc_text(), reason=None)
            log.info("job %s: finished (%s)", self.job.id, self._tally_text())
        elif outcome == "cancelled":
            who = self._cancelled_by()
            self._journal_fault("cancel", f"cancelled by {who}",
                                f"job stopped cleanly before sweep {self.next_index}")
            journal.end_run(self.run_id, "stopped", note=f"cancelled by {who}")
            self.state, self.reason = "cancelled", f"cancelled by {who}"
            self.job.write_state(state="cancelled", ended_utc=utc_text(), reason=self.reason)
            log.info("job %s: cancelled (%s)", self.job.id, self._tally_text())
        else:
            cause = self.stop.cause or "a stop request"
            self._journal_fault("stop", f"sweepd serve stopped ({cause})",
                                "no sweep left in flight; the job resumes on its schedule "
                                "when sweepd serve starts again")
            journal.update_run(self.run_id, note=f"paused at sweep {self.next_index}: "
                               f"sweepd serve stopped ({cause})")
            self.state, self.reason = "running", f"paused: sweepd serve stopped ({cause})"
        self._status(force=True)

    def _fail(self, exc: SweepdError) -> None:
        message = str(exc)
        log.error("job %s: failed: %s", self.job.id, message)
        if self.journal is not None and self.run_id:
            self._journal_fault(fault_kind(exc), message, "job failed")
            self.journal.end_run(self.run_id, "failed", note=message)
        self.state, self.reason = "failed", message
        self.job.write_state(state="failed", ended_utc=utc_text(), reason=message)
        if self._prepared:
            self._status(force=True)
        else:
            self.job.write_status({"job": self.job.id, "state": "failed", "reason": message,
                                   "updated_utc": utc_text()})

    def _cancelled_by(self) -> str:
        from acquire.soak.spool import read_json

        try:
            info = read_json(self.job.cancel_path, {})
        except SweepdError:
            info = {}
        return str(info.get("by") or "sweepd cancel")

    # -- drift series, reference, deviation file ---------------------------------------------
    def _devfile(self) -> DeviationFile:
        if self.devfile is None:
            assert self.reference is not None
            self.devfile = DeviationFile(self.job.data_dir, self.reference.freq_hz)
            self.devfile.repair()
        return self.devfile

    def _load_reference(self) -> None:
        """On resume with reference 'first': the first journalled sweep's file."""
        if self.spec.reference is not None:
            return  # read from its file at the first sweep (resampled onto the sweep grid)
        journal = self.journal
        assert journal is not None
        rows = journal.run_measurements(self.run_id, ("stored",), limit=1)
        if rows and rows[0]["touchstone"]:
            from acquire.touchstone import read_touchstone

            sweep = read_touchstone(rows[0]["touchstone"]).to_sweep()
            self.reference = make_reference(sweep, self.spec.parameter, self.spec.band_hz,
                                            f"sweep {rows[0]['seq']}")

    def _fill_adopted(self, rows: list[dict[str, Any]]) -> None:
        """Metrics for sweeps whose files were complete but whose rows were not finished."""
        from acquire.checks import evaluate_checks
        from acquire.touchstone import read_touchstone

        journal = self.journal
        assert journal is not None
        for row in rows:
            sweep = read_touchstone(row["touchstone"]).to_sweep()
            if self.reference is None:
                self._load_reference()
                if self.reference is None:
                    continue
            drift, delta_db, delta_deg = measure_drift(self.reference, sweep)
            verdict = evaluate_checks(list(self.plan.checks), sweep)
            t_s = parse_utc(row["time_utc"]).timestamp() - self.timeline.start
            metrics = {**verdict.metrics, "soak": {**drift.to_dict(), "t_s": round(t_s, 6),
                                                   "kept": ["adopted after a restart"]}}
            # files written before the kill are complete (atomic): the journal owns them too
            ts = Path(row["touchstone"])
            summary = ts.with_suffix(".json")
            raw = ts.with_name(f"{ts.stem}.raw{ts.suffix}")
            self._devfile().append(int(row["seq"]), delta_db, delta_deg)  # before the row
            journal.fill_measurement(
                int(row["id"]), metrics_json=json_text(metrics),
                verdict=verdict.verdict if verdict.results else None,
                exit_code=verdict.exit_code if verdict.results else None,
                worst_margin=worst_margin(verdict),
                summary=str(summary) if summary.is_file() else None,
                raw_touchstone=str(raw) if raw.is_file() else None)

    def _load_series(self) -> None:
        """The drift so far, from the journal (after a restart)."""
        ser = history.series(self.journal, self.run_id)
        done = ser.done_mask()
        if not done.any():
            return
        for i in np.flatnonzero(done):
            entry = ser.soak[i]
            if entry:
                drift = SweepDrift(**{k: (entry.get(k) if entry.get(k) is not None else math.nan)
                                      for k in SweepDrift.__dataclass_fields__})
                self._track(int(ser.seq[i]), drift, self.timeline.start + float(ser.t_s[i]),
                            quiet=True)
        last = int(np.flatnonzero(done)[-1])
        self.last_sweep = {"index": int(ser.seq[last]), "utc": None,
                           "verdict": ser.verdict[last], "kept": ser.state[last] == "stored"}
        self._update_allan(int(ser.seq[last]), force=True)

    def _track(self, k: int, drift: SweepDrift, started: float, quiet: bool = False) -> None:
        if k >= self._resonance.size:
            size = max(k + 1, 2 * self._resonance.size)
            self._resonance = np.concatenate([self._resonance,
                                              np.full(size - self._resonance.size, np.nan)])
            self._t_s = np.concatenate([self._t_s, np.full(size - self._t_s.size, np.nan)])
        if drift.resonance_hz is not None:
            self._resonance[k] = drift.resonance_hz
        self._t_s[k] = started - self.timeline.start
        for key, value in (("max_db", drift.max_db), ("max_deg", drift.max_deg),
                           ("resonance_shift_hz", drift.resonance_shift_hz),
                           ("worst_swr", drift.worst_swr),
                           ("worst_swr_rise", drift.worst_swr_rise)):
            if value is not None and math.isfinite(value):
                mag = abs(value)
                if mag >= abs(self.worst.get(key, 0.0)):
                    self.worst[key] = value
        if not quiet:
            self._update_allan(k)

    def _update_allan(self, k: int, force: bool = False) -> None:
        now = self.clock.now()
        if not force and now - self._allan_at < ALLAN_EVERY_S:
            return
        self._allan_at = now
        n = self.next_index + 1
        found = allan_points(self._resonance[:n], self._t_s[:n], self._tau0(),
                             self.spec.minimums)
        self.allan, self.stats_note = ([], found) if isinstance(found, str) else (found, None)
        watched = self.spec.alarms.resonance_adev_hz
        if watched is not None and self.allan:
            worst = max(p.adev for p in self.allan)
            raised, _ = self.alarms.check(k, {"resonance_adev_hz": worst})
            self._persist_alarms()
            for alarm in raised:
                self.journal.record_alarm(self.run_id, alarm.metric, alarm.message, seq=k,
                                          value=alarm.value, threshold=alarm.threshold)
                self.alarm_count += 1
                self.last_alarm = {"seq": k, "utc": utc_text(), "metric": alarm.metric,
                                   "value": alarm.value, "threshold": alarm.threshold,
                                   "message": alarm.message}

    def _tau0(self) -> float:
        if self.timeline.every > 0:
            return self.timeline.every
        t = self._t_s[np.isfinite(self._t_s)]
        return float(np.median(np.diff(t))) if t.size >= 2 else 0.0

    # -- status ------------------------------------------------------------------------------------
    def _status(self, force: bool = False) -> None:
        if not self._prepared:
            return
        now = self.clock.now()
        if not force and now - self._status_at < STATUS_EVERY_S:
            return
        self._status_at = now
        if self.devfile is not None:
            self.devfile.sync()
        try:
            self.job.write_status(self.status_dict(now))
        except OSError as exc:  # a full disk must not stop the sweeps: the journal has all
            log.warning("job %s: status file not written: %s", self.job.id, exc)

    def status_dict(self, now: float) -> dict[str, Any]:
        schedule = self.spec.schedule
        k = self.next_index
        in_plan = self.state == "running" and self.timeline.in_plan(k, now) and \
            self.reason is None
        done = sum(self.tally.get(s, 0) for s in history.DONE_STATES)
        return json_safe({
            "job": self.job.id,
            "state": self.state,
            "reason": self.reason,
            "run_id": self.run_id,
            "pid": os.getpid(),
            "updated_utc": utc_text(),
            "schedule": {"every_s": schedule.every_s, "count": schedule.count,
                         "duration_s": schedule.duration_s, "planned": schedule.total(),
                         "start_utc": epoch_text(self.timeline.start),
                         "end_utc": epoch_text(self.timeline.end_time())},
            "sweeps": {"done": done, "kept": self.tally.get("stored", 0),
                       "missed": self.tally.get("missed", 0),
                       "failed": self.tally.get("failed", 0),
                       "interrupted": self.tally.get("interrupted", 0)},
            "last_sweep": self.last_sweep,
            "last_fault": self.last_fault,
            "next_sweep": {"index": k, "due_utc": epoch_text(max(self.timeline.due(k), now))}
            if in_plan else None,
            "eta_utc": epoch_text(self._eta(now, done)),
            "drift": {
                "reference": self.reference.source if self.reference else None,
                "parameter": self.spec.parameter,
                "latest": self.latest.to_dict() if self.latest else None,
                "worst": dict(self.worst),
                "allan_resonance": [p.to_dict() for p in self.allan],
                "statistics": self.stats_note or "ready",
            },
            "alarms": {"count": self.alarm_count, "active": sorted(self.alarms.active),
                       "last": self.last_alarm},
            "files": {"data_dir": str(self.job.data_dir),
                      "journal": str(self.job.output_dir / JOURNAL_NAME)},
        })

    def _eta(self, now: float, done: int) -> float | None:
        end = self.timeline.end_time()
        if end is not None:
            return max(end, now)
        total = self.spec.schedule.total()
        if total is None or self.timeline.every > 0:
            return None
        t = self._t_s[np.isfinite(self._t_s)]
        if t.size < 2:
            return None
        period = (t[-1] - t[0]) / (t.size - 1)
        return now + max(0, total - self.next_index) * period

    def _tally_text(self) -> str:
        done = sum(self.tally.get(s, 0) for s in history.DONE_STATES)
        return (f"{done} sweeps, {self.tally.get('stored', 0)} kept, "
                f"{self.tally.get('missed', 0)} missed, {self.tally.get('failed', 0)} failed")


def disk_full(exc: BaseException) -> bool:
    """A journal or storage error that says the disk is full."""
    text = str(exc).lower()
    return "disk is full" in text or "no space left" in text
