"""What the live status page shows, gathered from the journals and the spool.

Stations: each served plan whose output folder has a journal, with its yield, its last
units and verdicts, its last golden check and whether the line is stopped. Soak jobs:
state, progress, latest drift, alarms and the last fault in words. Instruments: who holds
each one now. Everything is read, nothing written.
"""

from __future__ import annotations

import contextlib
import logging
from typing import Any

from acquire.utc import utc_now, utc_text
from drivers.errors import SweepdError

log = logging.getLogger(__name__)
LAST_UNITS = 8


def overview(service: Any) -> dict[str, Any]:
    return {"format": "sweepd-overview", "version": 1, "time_utc": utc_text(),
            "stations": _stations(service), "jobs": _jobs(service)}


def _stations(service: Any) -> list[dict[str, Any]]:
    found = []
    for name in service.plans.names():
        try:
            plan = service.plans.load(name)
        except SweepdError:
            continue  # a broken plan file is reported when someone runs it
        if not (plan.output.dir / "journal.sqlite").is_file():
            continue
        with contextlib.suppress(SweepdError):
            entry = _station(plan)
            if entry is not None:
                found.append(entry)
    return found


def _station(plan: Any) -> dict[str, Any] | None:
    from acquire.station.summary import load_selection

    selection = load_selection(plan.output.dir, plan=plan.name)
    units = [r for r in selection.records if r["state"] in ("stored", "measured")]
    if not units and not selection.plans:
        return None
    counters = selection.plans[0].counters.to_dict() if selection.plans else {}
    return {
        "plan": plan.name, "description": getattr(plan, "description", "") or "",
        "yield": counters,
        "last_units": [{"serial": r["serial"], "verdict": r["verdict"] or "unjudged",
                        "time_utc": r["time_utc"], "golden": bool(r["golden"]),
                        "worst_margin": r["worst_margin"]} for r in units[-LAST_UNITS:]][::-1],
        "line": _line(plan),
    }


def _line(plan: Any) -> dict[str, Any]:
    """Golden-unit state of the line: stopped, check due, or running."""
    from acquire.journal import journal_in
    from acquire.station.config import station_config
    from acquire.station.schedule import line_state

    golden = station_config(plan).golden
    if golden is None:
        return {"golden": False, "stopped": False, "reason": "", "due": False}
    with journal_in(plan.output.dir, read_only=True) as journal:
        state = line_state(journal, plan.name, golden, now=utc_now())
    return {"golden": True, "stopped": state.stopped, "reason": state.stop_reason,
            "due": state.due, "due_reason": state.due_reason,
            "last_good_utc": state.anchor_utc}


def _jobs(service: Any) -> list[dict[str, Any]]:
    from acquire.soak.sentences import fault_sentence
    from acquire.soak.status import spool_view

    spool = service.spool()
    if not spool.jobs_dir.is_dir():
        return []
    view = spool_view(spool)
    jobs = []
    for job in view["jobs"][-20:][::-1]:
        sweeps = job["sweeps"]
        planned = sweeps.get("planned")
        done = sweeps.get("done", 0)
        fault = job.get("last_fault")
        jobs.append({
            "id": job["id"], "plan": job["plan"], "state": job["state"],
            "resource": job["resource"], "done": done, "planned": planned,
            "missed": sweeps.get("missed", 0),
            "progress": round(done / planned, 4) if planned else None,
            "latest": (job.get("drift") or {}).get("latest"),
            "statistics": (job.get("drift") or {}).get("statistics"),
            "alarms": (job.get("alarms") or {}).get("count", 0),
            "last_fault": fault_sentence({"time_utc": fault.get("utc"), **fault})
            if fault else None,
            "has_run": job.get("run_id") is not None,
        })
    return jobs
