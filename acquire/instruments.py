"""One holder per instrument at a time, and sessions kept open between calls.

The HTTP service and the soak daemon share one ``Instruments`` object in a process: the
daemon holds an instrument for the life of a soak job, a measurement holds it for one
unit. A caller for a busy instrument waits up to its deadline, then gets
``InstrumentBusy`` naming the holder in words. Sessions opened for measurements stay open
(connected, identified, configured for their plan) so that the next unit on the same plan
costs one sweep; a session is reopened when the plan changes and dropped after any
instrument fault, so a failed link is never reused.
"""

from __future__ import annotations

import contextlib
import logging
import threading
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import Any

from drivers.errors import SweepdError
from drivers.resources import resource_key

log = logging.getLogger(__name__)


class InstrumentBusy(SweepdError):
    """Another caller holds the instrument past the caller's deadline."""


@dataclass(frozen=True)
class Holder:
    who: str  # in words: "soak job patch-soak-001", "measurement of unit SN-104"
    since: float  # epoch seconds

    def describe(self) -> str:
        clock = datetime.fromtimestamp(self.since, timezone.utc).strftime("%H:%M:%S UTC")
        return f"{self.who} (since {clock})"


@dataclass
class _Open:
    key: Any
    session: Any


class Instruments:
    """Holders and open sessions by instrument (see the module docstring)."""

    def __init__(self, opener: Callable[[Any, str], Any] | None = None) -> None:
        self._cond = threading.Condition()
        self._holders: dict[str, Holder] = {}
        self._open: dict[str, _Open] = {}
        self._opener = opener or _open_session

    # -- holding ---------------------------------------------------------------------------
    def try_hold(self, resource: str, who: str) -> bool:
        """Hold ``resource`` if nobody does (never waits)."""
        key = resource_key(resource)
        with self._cond:
            if key in self._holders:
                return False
            self._holders[key] = Holder(who, time.time())
        self._drop(key)  # the new holder opens its own connection
        return True

    def release(self, resource: str) -> None:
        with self._cond:
            self._holders.pop(resource_key(resource), None)
            self._cond.notify_all()

    def holder(self, resource: str) -> Holder | None:
        with self._cond:
            return self._holders.get(resource_key(resource))

    @contextlib.contextmanager
    def hold(self, resource: str, who: str, wait_s: float) -> Iterator[None]:
        """Hold ``resource`` for the block, waiting up to ``wait_s`` for the holder."""
        key = resource_key(resource)
        deadline = time.monotonic() + max(0.0, wait_s)
        with self._cond:
            while key in self._holders:
                remaining = deadline - time.monotonic()
                if remaining <= 0:
                    raise InstrumentBusy(
                        f"instrument {resource} is busy: held by "
                        f"{self._holders[key].describe()}; waited {wait_s:g} s")
                self._cond.wait(remaining)
            self._holders[key] = Holder(who, time.time())
        try:
            yield
        finally:
            self.release(resource)

    # -- sessions (call while holding) -----------------------------------------------------
    def session(self, plan: Any, resource: str) -> Any:
        """An open session for ``plan`` on ``resource``, reused when the plan is unchanged."""
        key = resource_key(resource)
        want = _plan_key(plan)
        found = self._open.get(key)
        if found is not None and found.key == want:
            return found.session
        self._drop(key)
        session = self._opener(plan, resource)
        self._open[key] = _Open(want, session)
        return session

    def discard(self, resource: str) -> None:
        """Close the open session (after a fault, so a broken link is never reused)."""
        self._drop(resource_key(resource))

    def close_all(self) -> None:
        for key in list(self._open):
            self._drop(key)

    def _drop(self, key: str) -> None:
        found = self._open.pop(key, None)
        if found is not None:
            with contextlib.suppress(Exception):  # closing a broken link may fail again
                found.session.close()


def _plan_key(plan: Any) -> Any:
    """What a session is configured for: the plan's file, instrument, stimulus, traces."""
    return (str(plan.source), repr(plan.instrument), repr(plan.stimulus), tuple(plan.measure))


def _open_session(plan: Any, resource: str) -> Any:
    from acquire.capture.session import Session

    return Session(plan, resource).open()
