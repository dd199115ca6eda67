"""The measurement path shared by every mode: open, configure, sweep, record, save.

``Session`` holds one open analyzer for a plan and turns each sweep into a ``Sweep``
record with full metadata; ``save_capture`` writes it as Touchstone (atomically, never
overwriting). Station and soak modes reuse both.
"""

from __future__ import annotations

import logging
import time
from dataclasses import asdict, dataclass
from datetime import datetime
from pathlib import Path
from typing import Any

import numpy as np

from acquire.plan import Plan
from acquire.storage import safe_component
from acquire.sweep import Sweep
from acquire.utc import compact_utc, utc_now, utc_text

log = logging.getLogger(__name__)


def stimulus_meta(stimulus: Any) -> dict[str, float | int]:
    return {key: (int(v) if key in ("points", "averaging") else float(v))
            for key, v in asdict(stimulus).items()}


@dataclass
class Session:
    """One analyzer opened and configured for one plan."""

    plan: Plan
    resource: str | None = None  # overrides plan.instrument.resource

    def __post_init__(self) -> None:
        from drivers.analyzer import Analyzer
        from drivers.dialect import load_dialect

        spec = self.plan.instrument
        self.resource = self.resource or spec.resource
        self.dialect = load_dialect(spec.dialect)
        self.analyzer = Analyzer(
            self.resource,
            self.dialect,
            timeout_s=spec.timeout_s,
            connect_timeout_s=spec.connect_timeout_s,
            data_format=spec.data_format,
            byte_order=spec.byte_order,
            serial={"baud_rate": spec.baud_rate} if spec.baud_rate else None,
            max_sweep_time_s=spec.max_sweep_time_s,
        )
        self.identity_text = ""
        self.applied = self.plan.stimulus

    def open(self) -> Session:
        from drivers.errors import ConnectError

        try:
            self.analyzer.open()
        except ConnectError as exc:  # a busy instrument: say who holds it, in words
            from acquire.holders import busy_message

            words = busy_message(str(exc), self.resource)
            if words is None:
                raise
            raise ConnectError(words) from None
        ident = self.analyzer.identity
        self.identity_text = ",".join(
            (ident.maker, ident.model, ident.serial, ident.firmware)
        )
        self.applied = self.analyzer.configure(self.plan.stimulus)
        log.info("connected to %s (%s), configured", self.resource, self.identity_text)
        return self

    def close(self) -> None:
        self.analyzer.close()

    def __enter__(self) -> Session:
        return self.open()

    def __exit__(self, *exc: object) -> None:
        self.close()

    def measure(self, serial: str = "", **meta: Any) -> Sweep:
        """One raw sweep of the plan's S-parameters as a ``Sweep`` with metadata."""
        started = utc_now()
        t0 = time.perf_counter()
        freq, data = self.analyzer.sweep(self.plan.measure)
        duration = time.perf_counter() - t0
        return Sweep(
            freq,
            assemble_matrix(data, self.plan.ports),
            (50.0,) * self.plan.ports,
            {
                "plan": self.plan.name,
                "serial": serial,
                "instrument": self.identity_text,
                "resource": self.resource,
                "dialect": self.dialect.name,
                "stimulus": stimulus_meta(self.applied),
                "started_utc": utc_text(started),
                "sweep_s": round(duration, 6),
                **meta,
            },
        )


def assemble_matrix(data: np.ndarray, ports: int) -> np.ndarray:
    """(n, k) columns in ``S11`` or ``S11 S21 S12 S22`` order → (n, p, p)."""
    if ports == 1:
        return data.reshape(-1, 1, 1)
    s = np.empty((data.shape[0], 2, 2), dtype=np.complex128)
    s[:, 0, 0], s[:, 1, 0], s[:, 0, 1], s[:, 1, 1] = data.T
    return s


def capture_path(plan: Plan, out_dir: Path, *, serial: str, verdict: str = "",
                 index: int | None = None, station: str = "", when: datetime | None = None,
                 suffix: str | None = None) -> Path:
    """The Touchstone path for a capture, built from the plan's name template."""
    fields = {
        "plan": plan.name,
        "serial": safe_component(serial) if serial else "unit",
        "time": compact_utc(when or utc_now()),
        "verdict": verdict or "none",
        "index": f"{index:06d}" if index is not None else "",
        "station": safe_component(station) if station else "",
    }
    stem = safe_component(plan.output.name.format(**fields), max_len=160)
    return out_dir / f"{stem}{suffix or f'.s{plan.ports}p'}"


def save_capture(sweep: Sweep, plan: Plan, path: Path, comments: tuple[str, ...] = (),
                 *, unique: bool = True) -> Path:
    """Write a sweep as Touchstone per the plan's output options; returns the final path.

    With ``unique=False`` the exact ``path`` is used or ``FileExistsError`` raised.
    """
    from acquire.touchstone import TouchstoneOptions, write_touchstone

    ts = plan.output.touchstone
    options = TouchstoneOptions(
        version=ts.version, fmt=ts.fmt, freq_unit=ts.freq_unit, precision=ts.precision
    )
    return write_touchstone(path, sweep, options, comments, unique=unique)
