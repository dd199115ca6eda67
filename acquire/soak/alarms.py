"""Alarms: a watched drift quantity crossed its threshold.

An alarm is raised when a quantity goes above its threshold (not again on every sweep
while it stays above). It is cleared once the quantity has stayed under the threshold for
``CLEAR_AFTER`` sweeps in a row, so a value hovering at the threshold does not raise a
storm of alarms (a debounce; common practice, not a standard). Each raised
alarm is journalled, logged as a WARNING line, shown in the status and, when the plan
gives ``alarms.command``, that command is run without a shell, with the details in its
environment: SWEEPD_JOB, SWEEPD_SWEEP, SWEEPD_METRIC, SWEEPD_VALUE, SWEEPD_THRESHOLD,
SWEEPD_MESSAGE.
"""

from __future__ import annotations

import logging
import os
import subprocess
import threading
from collections.abc import Callable, Mapping
from dataclasses import dataclass

from acquire.soak.ownership import OwnershipError, check_command
from acquire.soak.spec import Thresholds
from acquire.units import format_frequency

log = logging.getLogger(__name__)
COMMAND_TIMEOUT_S = 60.0
CLEAR_AFTER = 5  # sweeps under the threshold before an active alarm clears

LABELS = {
    "deviation_db": "max |change| of |S|",
    "deviation_deg": "max |change| of phase",
    "resonance_shift_hz": "resonance shift",
    "worst_swr": "worst in-band SWR",
    "worst_swr_rise": "worst in-band SWR rise",
    "resonance_adev_hz": "Allan deviation of the resonance",
}


def format_metric(name: str, value: float) -> str:
    if name.endswith("_hz"):
        return format_frequency(value)
    if name == "deviation_db":
        return f"{value:.3f} dB"
    if name == "deviation_deg":
        return f"{value:.2f} deg"
    return f"{value:.3f}"


@dataclass(frozen=True)
class Alarm:
    metric: str
    value: float
    threshold: float
    seq: int
    message: str


class AlarmBook:
    """Tracks which alarms are active and raises the new ones."""

    def __init__(self, thresholds: Thresholds, job_id: str, active: set[str] | None = None,
                 on_command_failure: Callable[[str], None] | None = None) -> None:
        self.thresholds = thresholds
        self.watched = thresholds.watched()
        self.job_id = job_id
        self.active = set(active or ())
        self.on_command_failure = on_command_failure
        self._under: dict[str, int] = {}

    def check(self, seq: int, values: Mapping[str, float | None]) -> tuple[list[Alarm], set[str]]:
        """New alarms for this sweep, and every watched quantity now over its threshold."""
        raised, over = [], set()
        for name, value in values.items():
            limit = self.watched.get(name)
            if limit is None or value is None:
                continue
            if value > limit:
                over.add(name)
                self._under[name] = 0
                if name not in self.active:
                    self.active.add(name)
                    raised.append(Alarm(
                        name, value, limit, seq,
                        f"{LABELS[name]} {format_metric(name, value)} is above "
                        f"{format_metric(name, limit)} at sweep {seq}",
                    ))
            elif name in self.active:
                self._under[name] = self._under.get(name, 0) + 1
                if self._under[name] < CLEAR_AFTER:
                    continue
                self.active.discard(name)
                log.info("job %s: alarm cleared at sweep %d: %s back to %s", self.job_id, seq,
                         LABELS[name], format_metric(name, value))
        for alarm in raised:
            log.warning("job %s: ALARM %s", self.job_id, alarm.message)
            if self.thresholds.command:
                self._run_command(alarm)
        return raised, over

    def _run_command(self, alarm: Alarm) -> None:
        env = dict(os.environ, SWEEPD_JOB=self.job_id, SWEEPD_SWEEP=str(alarm.seq),
                   SWEEPD_METRIC=alarm.metric, SWEEPD_VALUE=repr(alarm.value),
                   SWEEPD_THRESHOLD=repr(alarm.threshold), SWEEPD_MESSAGE=alarm.message)
        command = list(self.thresholds.command)
        try:  # checked again here: the file may have changed since the job started
            check_command(command, "alarm command")
        except OwnershipError as exc:
            log.warning("job %s: %s", self.job_id, exc)
            if self.on_command_failure is not None:
                self.on_command_failure(str(exc))
            return
        threading.Thread(target=self._command_thread, args=(command, env),
                         name="sweepd-alarm-command", daemon=True).start()

    def _command_thread(self, command: list[str], env: dict[str, str]) -> None:
        problem = None
        try:
            done = subprocess.run(command, env=env, stdin=subprocess.DEVNULL,
                                  stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                  timeout=COMMAND_TIMEOUT_S, check=False)
            if done.returncode != 0:
                problem = f"alarm command {command[0]!r} exited with status {done.returncode}"
        except subprocess.TimeoutExpired:
            problem = f"alarm command {command[0]!r} ran longer than {COMMAND_TIMEOUT_S:g} s"
        except OSError as exc:
            problem = f"alarm command {command[0]!r} could not run: {exc.strerror or exc}"
        if problem:
            log.warning("job %s: %s", self.job_id, problem)
            if self.on_command_failure is not None:
                self.on_command_failure(problem)
