"""Short human lines about a job's progress: sweeps done, missed, next sweep, ETA."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from acquire.units import format_duration, format_frequency
from acquire.utc import parse_utc, utc_now


def clock_text(utc: str | None, now: datetime | None = None) -> str:
    """``06:10:00`` (local time) for today, ``Dec 03 06:10`` otherwise, ``-`` for none."""
    if not utc:
        return "-"
    when = parse_utc(utc).astimezone()
    today = (now or utc_now()).astimezone().date()
    return when.strftime("%H:%M:%S" if when.date() == today else "%b %d %H:%M")


def sweeps_text(status: dict[str, Any]) -> str:
    sweeps = status.get("sweeps") or {}
    planned = (status.get("schedule") or {}).get("planned")
    done = sweeps.get("done", 0)
    return f"{done}/{planned}" if planned else str(done)


def drift_text(status: dict[str, Any]) -> str:
    """``res +12.3 kHz, |dS| 0.05 dB, 0.8 deg`` from the latest sweep."""
    latest = ((status.get("drift") or {}).get("latest")) or {}
    parts = []
    shift = latest.get("resonance_shift_hz")
    if shift is not None:
        parts.append(f"res {'+' if shift >= 0 else '-'}{format_frequency(abs(shift))}")
    if latest.get("max_db") is not None:
        parts.append(f"{latest['max_db']:.3f} dB")
    if latest.get("max_deg") is not None:
        parts.append(f"{latest['max_deg']:.2f} deg")
    return ", ".join(parts) or "-"


def progress_line(job_id: str, status: dict[str, Any]) -> str:
    """One line for a terminal: ``job X: 120/480 sweeps, 2 missed, next 06:10:00, ETA ...``."""
    sweeps = status.get("sweeps") or {}
    parts = [f"{sweeps_text(status)} sweeps", f"{sweeps.get('missed', 0)} missed"]
    nxt = status.get("next_sweep")
    if nxt:
        parts.append(f"next {clock_text(nxt.get('due_utc'))}")
    eta = status.get("eta_utc")
    if eta:
        left = (parse_utc(eta) - utc_now()).total_seconds()
        parts.append(f"ETA {clock_text(eta)} ({format_duration(max(0.0, left))} left)")
    parts.append(f"drift {drift_text(status)}")
    return f"job {job_id}: " + ", ".join(parts)
