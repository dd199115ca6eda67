"""Faults injected for real at the wire, one-shot, counted or on a schedule.

Kinds and their options (defaults in brackets):

    drop         close the connection instead of replying (serial: the reply is lost)
    stall        send nothing for ``seconds`` [2.0], then the reply
    garbage      send ``nbytes`` [64] seeded random bytes (no LF among them) + LF instead
    truncate     send the first ``fraction`` [0.5] of the reply, then ``then``: close|stall
                 [close] (stall: the rest is never sent)
    wrong_count  a well-formed trace reply with one point too few
    error        push ``code`` [-310] with ``text`` ["injected fault"] into the error queue
    reboot       forget settings (*RST), clear the error queue, drop the link and refuse
                 connections for ``down_s`` [1.0] seconds (serial: input ignored)

Each armed fault fires on an event, ``on``: ``data`` (the next reply carrying trace data),
``reply`` (the next reply of any query), ``sweep`` (the next sweep start) or ``now`` (at
once; error and reboot only). Defaults: ``sweep`` for error and reboot, ``data`` for the
rest. ``count=N`` fires on N events; ``endpoint`` ("tcp"/"serial"/"hislip"/"vxi11")
restricts
where.
``schedule(every=N, kind=...)`` arms a one-shot fault at every Nth sweep;
``schedule(at=[(index, kind), ...])`` at given sweep indices (1 = first sweep after start).
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from simulators.errors import SimError

KINDS = ("drop", "stall", "garbage", "truncate", "wrong_count", "error", "reboot")
REPLY_KINDS = ("drop", "stall", "garbage", "truncate")
EVENTS = ("data", "reply", "sweep", "now")
ENDPOINTS = ("tcp", "serial", "hislip", "vxi11")
_OPTIONS: dict[str, dict[str, Any]] = {
    "drop": {},
    "stall": {"seconds": 2.0},
    "garbage": {"nbytes": 64},
    "truncate": {"fraction": 0.5, "then": "close"},
    "wrong_count": {},
    "error": {"code": -310, "text": "injected fault"},
    "reboot": {"down_s": 1.0},
}


@dataclass
class Fault:
    kind: str
    on: str
    count: int
    options: dict[str, Any]
    endpoint: str | None = None

    def describe(self) -> dict[str, Any]:
        return {"kind": self.kind, "on": self.on, "count": self.count,
                "endpoint": self.endpoint, **self.options}


@dataclass
class Scheduled:
    kind: str
    options: dict[str, Any]
    every: int = 0
    at: frozenset[int] = frozenset()
    extra: dict[str, Any] = field(default_factory=dict)

    def due(self, index: int) -> bool:
        return (self.every > 0 and index % self.every == 0) or index in self.at


class Faults:
    """Armed faults and schedules; shared by the sessions and the control channel."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._armed: list[Fault] = []
        self._schedule: list[Scheduled] = []
        self.fired: list[dict[str, Any]] = []
        self.now_handler: Callable[[Fault], None] | None = None

    def arm(self, kind: str, count: int = 1, on: str | None = None,
            endpoint: str | None = None, **options: Any) -> Fault:
        """Arm a fault (see the module docstring); returns it."""
        fault = make_fault(kind, count, on, endpoint, options)
        if fault.on == "now":
            if self.now_handler is None:
                raise SimError("fault: 'now' needs a running simulator")
            for _ in range(fault.count):
                self._log(fault, "now", None, None)
                self.now_handler(fault)
            return fault
        with self._lock:
            self._armed.append(fault)
        return fault

    def schedule(self, kind: str | None = None, every: int | None = None,
                 at: list | None = None, **options: Any) -> None:
        """Arm one-shot faults at every Nth sweep or at listed sweep indices."""
        entries: list[Scheduled] = []
        if every is not None:
            if kind is None or int(every) < 1:
                raise SimError("fault schedule: 'every' needs a kind and a count >= 1")
            make_fault(kind, 1, options.get("on"), options.get("endpoint"), _opts(options))
            entries.append(Scheduled(kind, options, every=int(every)))
        for item in at or []:
            if isinstance(item, (int, float)) and kind is not None:
                index, item_kind, item_opts = int(item), kind, options
            elif isinstance(item, (list, tuple)) and 2 <= len(item) <= 3:
                index, item_kind = int(item[0]), str(item[1])
                item_opts = dict(item[2]) if len(item) == 3 else {}
            else:
                raise SimError(f"fault schedule: bad 'at' entry {item!r}; use [index, kind] "
                               "or [index, kind, {options}]")
            make_fault(item_kind, 1, item_opts.get("on"), item_opts.get("endpoint"),
                       _opts(item_opts))
            entries.append(Scheduled(item_kind, item_opts, at=frozenset([index])))
        if not entries:
            raise SimError("fault schedule: give 'every' or 'at'")
        with self._lock:
            self._schedule.extend(entries)

    def clear(self) -> None:
        with self._lock:
            self._armed.clear()
            self._schedule.clear()

    def on_sweep(self, index: int, endpoint: str | None) -> list[Fault]:
        """A sweep starts: arm scheduled faults, return the sweep-event faults that fire."""
        with self._lock:
            for entry in self._schedule:
                if entry.due(index):
                    opts = dict(entry.options)
                    self._armed.append(make_fault(entry.kind, 1, opts.pop("on", None),
                                                  opts.pop("endpoint", None), opts))
        return self._take("sweep", endpoint, KINDS, index)

    def take(self, event: str, endpoint: str | None, kinds: tuple[str, ...] = KINDS,
             sweep: int | None = None) -> Fault | None:
        """The first armed fault for a data/reply event, consumed once; or None."""
        fired = self._take(event, endpoint, kinds, sweep, first_only=True)
        return fired[0] if fired else None

    def _take(self, event: str, endpoint: str | None, kinds: tuple[str, ...],
              sweep: int | None, first_only: bool = False) -> list[Fault]:
        if not self._armed:
            return []
        out = []
        with self._lock:
            for fault in list(self._armed):
                matches_event = fault.on == event or (fault.on == "reply" and event == "data")
                if not matches_event or fault.kind not in kinds:
                    continue
                if fault.endpoint is not None and fault.endpoint != endpoint:
                    continue
                fault.count -= 1
                if fault.count <= 0:
                    self._armed.remove(fault)
                out.append(fault)
                self._log(fault, event, endpoint, sweep)
                if first_only:
                    break
        return out

    def _log(self, fault: Fault, event: str, endpoint: str | None, sweep: int | None) -> None:
        self.fired.append({"kind": fault.kind, "event": event, "endpoint": endpoint,
                           "sweep": sweep, "time": time.time()})
        del self.fired[:-1000]

    def describe(self) -> dict[str, Any]:
        with self._lock:
            return {
                "armed": [f.describe() for f in self._armed],
                "schedule": [{"kind": s.kind, "every": s.every, "at": sorted(s.at),
                              **s.options} for s in self._schedule],
                "fired": list(self.fired[-50:]),
            }


def _opts(options: dict[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in options.items() if k not in ("on", "endpoint")}


def make_fault(kind: str, count: int, on: str | None, endpoint: str | None,
               options: dict[str, Any]) -> Fault:
    """Validate a fault description; errors name the kind and option."""
    if kind not in KINDS:
        raise SimError(f"fault: unknown kind {kind!r}; allowed: {', '.join(KINDS)}")
    defaults = _OPTIONS[kind]
    for key in options:
        if key not in defaults:
            allowed = ", ".join(defaults) or "none"
            raise SimError(f"fault {kind}: unknown option {key!r}; allowed: {allowed}, "
                           "count, on, endpoint")
    values = {**defaults, **options}
    event = on or ("sweep" if kind in ("error", "reboot") else "data")
    if event not in EVENTS:
        raise SimError(f"fault {kind}: on must be one of {', '.join(EVENTS)}, got {event!r}")
    if event == "sweep" and kind not in ("error", "reboot"):
        raise SimError(f"fault {kind}: acts on a reply; use on=data or on=reply")
    if event == "now" and kind not in ("error", "reboot"):
        raise SimError(f"fault {kind}: only error and reboot can happen 'now'")
    if kind == "wrong_count" and event != "data":
        raise SimError("fault wrong_count: only on=data")
    if endpoint not in (None, *ENDPOINTS):
        raise SimError(f"fault {kind}: endpoint must be one of {', '.join(ENDPOINTS)}, "
                       f"got {endpoint!r}")
    try:
        count = int(count)
        for key, default in defaults.items():
            values[key] = type(default)(values[key])
    except (TypeError, ValueError):
        raise SimError(f"fault {kind}: bad option value in {options!r}") from None
    if count < 1:
        raise SimError(f"fault {kind}: count must be >= 1, got {count}")
    if kind == "truncate" and not (0 < values["fraction"] < 1 and values["then"] in ("close",
                                                                                   "stall")):
        raise SimError("fault truncate: fraction must be in (0, 1) and then close or stall")
    if kind in ("stall", "reboot") and not values.get("seconds", values.get("down_s")) >= 0:
        raise SimError(f"fault {kind}: duration must be >= 0")
    if kind == "garbage" and not 1 <= values["nbytes"] <= 1 << 20:
        raise SimError("fault garbage: nbytes must be 1..1048576")
    return Fault(kind, event, count, values, endpoint)
