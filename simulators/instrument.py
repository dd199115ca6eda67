"""The analyzer behind both personalities: settings, sweeps, trace data, timing, status.

One ``AnalyzerCore`` per simulator, shared by all endpoints; every message runs under
``core.lock`` (a Condition, so waits for a sweep or a settle release it). Timing is real
time scaled by ``time_scale`` (0: everything instant). A trace is available once a sweep
started after the last data-relevant settings change has finished; otherwise the query
queues −230 and sends nothing (``stale_on_change``; a personality may instead keep
serving the last sweep, whose frequency axis then tells which settings it had).

Sweep time (nominal, before scaling) = averaging × points × (1/IFBW + 20 µs) + 2 ms: the
receiver settles about one IF period per point, plus per-point overhead and a retrace
(common practice for a stepped sweep; the constants are invented).
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from simulators.bench import Bench
from simulators.faults import Fault, Faults
from simulators.scpi_errors import ESR_OPC, ScpiError, Status

POINT_OVERHEAD_S = 20e-6
RETRACE_S = 2e-3
DATA_FIELDS = ("start_hz", "stop_hz", "points", "power_dbm", "ifbw_hz", "avg_on",
               "avg_count", "output_on")


class LinkDown(Exception):
    """The link must drop now (reboot); the session closes without replying."""


class Stopped(Exception):
    """The simulator is shutting down; sessions end."""


@dataclass
class Settings:
    """Instrument state that ``*RST`` restores (SI units)."""

    start_hz: float = 10e6
    stop_hz: float = 6e9
    points: int = 201
    power_dbm: float = 0.0
    ifbw_hz: float = 1e3
    avg_on: bool = False
    avg_count: int = 1
    output_on: bool = True
    continuous: bool = False
    trigger_source: str = "IMM"
    data_format: str = "ASC"
    data_width: int = 64
    byte_order: str = "NORM"

    def data_key(self) -> tuple:
        return tuple(getattr(self, name) for name in DATA_FIELDS)


@dataclass
class SweepData:
    """One finished (or running) sweep; ``replies`` caches encoded answers.

    ``levels`` are the sweep's (power dBm, IF bandwidth Hz, averaging, output on);
    ``switch`` the switch terms read with it (n, 2), made when first asked for.
    """

    freq_hz: np.ndarray
    raw: np.ndarray
    index: int
    ready_at: float
    replies: dict[tuple, bytes] = field(default_factory=dict)
    levels: tuple[float, float, int, bool] = (0.0, 1e3, 1, True)
    switch: np.ndarray | None = None


class AnalyzerCore:
    """Shared instrument state; see the module docstring."""

    def __init__(self, bench: Bench, faults: Faults, identity: str, time_scale: float = 0.0,
                 frozen: bool = False) -> None:
        self.lock = threading.Condition(threading.RLock())
        self.bench = bench
        self.faults = faults
        self.identity = identity
        self.time_scale = float(time_scale)
        self.frozen = bool(frozen)
        self.stale_on_change = True
        self.status = Status()
        self.settings = Settings()
        self.sweep_count = 0
        self.stopping = False
        self.down_until = 0.0
        self.opc_pending = False
        self.on_reboot: Callable[[float], None] | None = None
        self._busy_until = 0.0
        self._armed = False
        self._stale = True
        self._data: SweepData | None = None
        self._frozen: dict[tuple, SweepData] = {}
        self._pending: list[tuple[float, Callable[[], None]]] = []

    # -- settings ------------------------------------------------------------------
    def change(self, **values: Any) -> None:
        """Apply settings; a data-relevant change aborts a running sweep and stales data."""
        s = self.settings
        relevant = any(name in DATA_FIELDS and getattr(s, name) != v for name, v in values.items())
        for name, value in values.items():
            setattr(s, name, value)
        if relevant and self.stale_on_change:
            self._stale = True
            self._busy_until = 0.0
            self._armed = False

    def defer(self, settle_s: float, action: Callable[[], None]) -> None:
        """Run ``action`` after a settle time (scaled); ``*OPC?`` waits for it."""
        delay = settle_s * self.time_scale
        if delay <= 0:
            action()
            return
        self._pending.append((time.monotonic() + delay, action))

    def apply_due(self) -> None:
        if not self._pending:
            return
        now = time.monotonic()
        due = [item for item in self._pending if item[0] <= now]
        self._pending = [item for item in self._pending if item[0] > now]
        for _, action in sorted(due, key=lambda item: item[0]):
            action()

    def reset(self) -> None:
        """``*RST``: default settings, sweep aborted, data stale; error queue kept."""
        self.settings = Settings()
        self._pending.clear()
        self._busy_until = 0.0
        self._armed = False
        self._stale = True
        self.opc_pending = False

    def power_on(self) -> None:
        self.reset()
        self.status.power_on()

    # -- timing --------------------------------------------------------------------
    def sweep_time_s(self) -> float:
        s = self.settings
        count = s.avg_count if s.avg_on else 1
        return count * s.points * (1.0 / s.ifbw_hz + POINT_OVERHEAD_S) + RETRACE_S

    def sweeping(self) -> bool:
        return time.monotonic() < self._busy_until

    def busy(self) -> bool:
        """A sweep is running or a setting is still settling."""
        return self.sweeping() or bool(self._pending)

    def wait_idle(self) -> None:
        """Block (lock released) until no sweep runs and no setting is settling."""
        while True:
            self.apply_due()
            if self.stopping:
                raise Stopped
            now = time.monotonic()
            ends = [self._busy_until] + [t for t, _ in self._pending]
            remaining = max(ends) - now
            if remaining <= 0:
                return
            self.lock.wait(timeout=min(remaining, 0.25))

    def sleep(self, seconds: float) -> None:
        """Wait (lock released) for ``seconds`` unless stopping."""
        end = time.monotonic() + seconds
        while not self.stopping:
            remaining = end - time.monotonic()
            if remaining <= 0:
                return
            self.lock.wait(timeout=min(remaining, 0.25))
        raise Stopped

    def poll_opc(self) -> None:
        """``*OPC`` bookkeeping: set ESR bit 0 once pending operations are done."""
        self.apply_due()
        if self.opc_pending and not self.busy():
            self.status.esr |= ESR_OPC
            self.opc_pending = False

    # -- sweeping ------------------------------------------------------------------
    def initiate(self, endpoint: str | None) -> None:
        """``INIT``: start now (trigger IMMediate) or arm for BUS/EXTernal."""
        if self.settings.continuous or self.sweeping() or self._armed:
            raise ScpiError(-213, "sweep already running or armed")
        if self.settings.trigger_source == "IMM":
            self.start_sweep(endpoint)
        else:
            self._armed = True

    def trigger(self, endpoint: str | None, source: str) -> None:
        """``*TRG`` (BUS) or the control channel's external trigger (EXT)."""
        if not self._armed or self.settings.trigger_source != source:
            raise ScpiError(-211, f"not armed for a {source} trigger")
        self._armed = False
        self.start_sweep(endpoint)

    def abort(self) -> None:
        if self.sweeping():
            self._stale = True
        self._busy_until = 0.0
        self._armed = False

    def start_sweep(self, endpoint: str | None) -> SweepData:
        """Measure now; the data become readable after the (scaled) sweep time."""
        self.sweep_count += 1
        for fault in self.faults.on_sweep(self.sweep_count, endpoint):
            self.apply_fault(fault)
        s = self.settings
        duration = self.sweep_time_s() * self.time_scale
        key = (s.data_key(), self.bench.version)
        data = self._frozen.get(key) if self.frozen else None
        if data is None:
            freq = np.linspace(s.start_hz, s.stop_hz, s.points)
            levels = (s.power_dbm, s.ifbw_hz, s.avg_count if s.avg_on else 1, s.output_on)
            raw = self.bench.sweep(freq, *levels)
            data = SweepData(freq, raw, self.sweep_count, 0.0, levels=levels)
            if self.frozen:
                if len(self._frozen) > 16:
                    self._frozen.clear()
                self._frozen[key] = data
        data.index = self.sweep_count
        data.ready_at = time.monotonic() + duration
        self._busy_until = data.ready_at
        self._data = data
        self._stale = False
        return data

    def trace(self, endpoint: str | None) -> SweepData:
        """The last complete sweep, or −230 when there is none since the last change."""
        if self.settings.continuous and not self.sweeping():
            self.start_sweep(endpoint)
        data = self._data
        if self._stale or data is None:
            raise ScpiError(-230, "no sweep since the last settings change")
        if time.monotonic() < data.ready_at:
            raise ScpiError(-230, "sweep in progress")
        return data

    def values(self, data: SweepData, source: tuple[int, int] | int) -> np.ndarray:
        """One trace of ``data``: raw S at (row, col), or switch term 0 (a2/b2, port 1
        driving) or 1 (a1/b1, port 2 driving), read with that sweep."""
        if isinstance(source, tuple):
            return data.raw[:, source[0], source[1]]
        if data.switch is None:
            data.switch = self.bench.switch_readings(data.freq_hz, data.raw, *data.levels)
        return data.switch[:, source]

    def has_data(self) -> bool:
        return not self._stale and self._data is not None

    # -- faults --------------------------------------------------------------------
    def apply_fault(self, fault: Fault) -> None:
        """Error and reboot faults act on the instrument itself."""
        if fault.kind == "error":
            self.status.push_entry((int(fault.options["code"]), str(fault.options["text"])))
        elif fault.kind == "reboot":
            self.reboot(float(fault.options["down_s"]))
            raise LinkDown

    def reboot(self, down_s: float) -> None:
        self.power_on()
        self.down_until = time.monotonic() + down_s
        if self.on_reboot is not None:
            self.on_reboot(down_s)

    def stop(self) -> None:
        with self.lock:
            self.stopping = True
            self.lock.notify_all()
