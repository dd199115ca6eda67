"""The soak's hold on its instrument: connect, reconnect with backoff, verify settings.

After an instrument fault the link is marked suspect. Before the next sweep it is made
ready again: reopened (a fresh session: clear, identify, data format chosen again) unless
the fault was only an entry in the error queue, then the settings are read back. An
instrument that no longer holds them (it restarted and forgot) is reopened once more, so
everything it forgot with them (data format, byte order) is sent again, and configured; the
host-side calibration stays valid when the settings read back match the ones it was
chosen for (same grid, power, IF bandwidth, averaging), otherwise it is chosen anew.
Failed attempts wait a bounded, doubling delay (``Backoff``).
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from dataclasses import dataclass

from acquire.capture.calchoice import CalChoice, choose_calibration
from acquire.capture.session import Session
from acquire.errors import CalError, JournalError, PlanError, StorageError, TouchstoneError
from acquire.plan import Plan
from drivers.errors import (
    BlockError,
    ConnectError,
    ConnectionLost,
    DialectError,
    InstrumentTimeout,
    ReplyError,
    ScpiErrorQueue,
    SettingMismatch,
    SweepdError,
)

log = logging.getLogger(__name__)

# Exception type -> fault kind in the journal, most specific first.
FAULT_KINDS: tuple[tuple[type[BaseException], str], ...] = (
    (ConnectError, "connect"),
    (InstrumentTimeout, "timeout"),
    (ConnectionLost, "connection-lost"),
    (BlockError, "bad-block"),
    (ScpiErrorQueue, "scpi-error"),
    (SettingMismatch, "setting-mismatch"),
    (ReplyError, "bad-reply"),
    (DialectError, "dialect"),
    (CalError, "calibration"),
    (PlanError, "plan"),
    (TouchstoneError, "storage"),
    (StorageError, "storage"),
    (JournalError, "journal"),
    (OSError, "storage"),
)


def fault_kind(exc: BaseException) -> str:
    for cls, kind in FAULT_KINDS:
        if isinstance(exc, cls):
            return kind
    return "error"


class Backoff:
    """Bounded exponential backoff: first, 2·first, 4·first, … capped at ``biggest``."""

    def __init__(self, first_s: float, biggest_s: float) -> None:
        self.first_s = first_s
        self.biggest_s = biggest_s
        self.failures = 0
        self.since: float | None = None  # when the current run of failures began

    def fail(self, now: float) -> float:
        """Count a failure; returns how long to wait before the next try."""
        if self.since is None:
            self.since = now
        delay = min(self.biggest_s, self.first_s * 2.0 ** self.failures)
        self.failures += 1
        return delay

    def reset(self) -> None:
        self.failures = 0
        self.since = None


@dataclass
class Readiness:
    """What making the link ready did (for the journal)."""

    opened: bool = False
    reconnected: bool = False
    reconfigured: bool = False
    cal_kept: bool = True


class InstrumentLink:
    """One plan's analyzer session, kept usable across faults."""

    def __init__(self, plan: Plan, resource: str | None = None) -> None:
        self.plan = plan
        self.resource = resource or plan.instrument.resource
        self.session: Session | None = None
        self.cal = CalChoice()
        self.suspect = False
        self.reopen = False
        self.ever_opened = False

    @property
    def ready(self) -> bool:
        return self.session is not None and self.session.is_open and not self.suspect

    def make_ready(self, on_note: Callable[[str, str, str], None]) -> Readiness:
        """Open, or reopen and check the settings; ``on_note(kind, message, action)``
        reports what was found (a forgotten configuration, a reconnect)."""
        done = Readiness()
        if self.session is None:
            self.session = Session(self.plan, self.resource)
        session = self.session
        if not self.ever_opened:
            self.session.open()
            self.cal = choose_calibration(self.plan, self.session)
            self.ever_opened = True
            self.suspect = False
            done.opened = True
            return done
        if self.reopen or not session.is_open:
            session.reconnect()
            done.reconnected = True
            self.reopen = False
        if session.settings_lost():
            session.reconnect()  # a restarted instrument forgot its data format too
            done.reconfigured = True
            done.cal_kept = session.reconfigure()
            if not done.cal_kept:
                self.cal = choose_calibration(self.plan, self.session)
            cal_text = ("host-side calibration kept (settings as before)" if done.cal_kept
                        else "calibration chosen again for the new settings")
            on_note("settings-lost",
                    f"instrument {self.resource}: settings read back differ from the plan's "
                    "(it restarted or was changed)",
                    f"reconfigured; {cal_text}")
        self.suspect = False
        return done

    def mark_suspect(self, reopen: bool = True) -> None:
        """Check the link before the next sweep; ``reopen`` starts a fresh session."""
        self.suspect = True
        self.reopen = self.reopen or reopen

    def close(self) -> None:
        if self.session is not None:
            try:
                self.session.close()
            except SweepdError as exc:
                log.debug("closing %s: %s", self.resource, exc)
