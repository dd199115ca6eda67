"""``sweepd status``: every job as the spool and the journal see it, as text or JSON.

Counts of sweeps come from the journal (the record), the live parts (next sweep, drift so
far, last fault, alarms) from the status file the worker rewrites while it runs. Layout of
``--json`` (one object):

    {"spool": PATH, "daemon": {"running": BOOL, "pid": INT|null},
     "jobs": [{"id", "plan", "resource", "state", "note", "submitted_utc",
               "started_utc", "ended_utc", "run_id",
               "sweeps": {"planned", "done", "kept", "missed", "failed", "pending",
                          "interrupted"},
               "last_sweep": {"index", "utc", "verdict", "kept"}|null,
               "last_fault": {"utc", "seq", "kind", "message", "action"}|null,
               "next_sweep": {"index", "due_utc"}|null, "eta_utc",
               "drift": {"reference", "parameter", "latest": {...}, "worst": {...},
                         "allan_resonance": [{"tau_s", "m", "adev", "terms"}, ...]},
               "alarms": {"count", "active": [...], "last": {...}|null},
               "files": {"data_dir", "journal"}}]}
"""

from __future__ import annotations

from typing import Any

from acquire.errors import JournalError
from acquire.journal import JOURNAL_NAME
from acquire.soak import history
from acquire.soak.progress import clock_text, drift_text, sweeps_text
from acquire.soak.spool import ACTIVE_STATES, Job, Spool, SpoolError
from drivers.errors import SweepdError
from drivers.resources import resource_key

COUNTERS = ("done", "kept", "missed", "failed", "pending", "interrupted")


def spool_view(spool: Spool, only: list[Job] | None = None) -> dict[str, Any]:
    pid = spool.daemon_pid()
    jobs = only if only is not None else spool.jobs()
    views = [job_view(job, daemon_running=pid is not None) for job in jobs]
    running = {resource_key(v["resource"]): v["id"] for v in views if v["state"] == "running"}
    for view in views:
        holder = running.get(resource_key(view["resource"]))
        if view["state"] == "queued" and holder and holder != view["id"] and not view["note"]:
            view["note"] = f"waiting for {holder} (same instrument)"
    return {"spool": str(spool.root), "daemon": {"running": pid is not None, "pid": pid},
            "jobs": views}


def job_view(job: Job, *, daemon_running: bool) -> dict[str, Any]:
    try:
        state = job.read_state()
        live = job.read_status()
    except SpoolError as exc:
        state, live = {"state": "unknown", "reason": str(exc)}, {}
    name = state.get("state", "queued")
    note = state.get("reason") or live.get("reason")
    if name in ACTIVE_STATES and name != "queued" and not daemon_running:
        note = "sweepd serve is not running; the job resumes on its schedule when it starts"
    elif name == "queued" and not daemon_running:
        note = "waiting for sweepd serve"
    if job.cancel_requested and name in ACTIVE_STATES:
        note = "cancel requested"
    view: dict[str, Any] = {
        "id": job.id, "uid": job.uid or None, "plan": job.plan_name,
        "resource": job.resource, "state": name, "note": note, "submitted_utc": job.submitted_utc,
        "started_utc": state.get("started_utc"), "ended_utc": state.get("ended_utc"),
        "run_id": state.get("run_id"),
        "sweeps": {**dict.fromkeys(COUNTERS, 0), **(live.get("sweeps") or {}),
                   "planned": _planned(job, live)},
        "last_sweep": live.get("last_sweep"), "last_fault": live.get("last_fault"),
        "next_sweep": live.get("next_sweep") if name in ("running", "held") else None,
        "eta_utc": live.get("eta_utc") if name in ACTIVE_STATES else None,
        "drift": live.get("drift") or {"reference": None, "parameter": None, "latest": None,
                                       "worst": {}, "allan_resonance": [],
                                       "statistics": "not enough data (not started)"},
        "alarms": {"count": 0, "active": [], "last": None, **(live.get("alarms") or {})},
        "files": live.get("files") or {"data_dir": str(job.data_dir),
                                       "journal": str(job.output_dir / JOURNAL_NAME)},
    }
    _merge_journal(job, view)
    return view


def _planned(job: Job, live: dict[str, Any]) -> int | None:
    """Sweeps the schedule plans (None: until cancelled), from the worker or the plan."""
    schedule = live.get("schedule") or {}
    if "planned" in schedule:
        return schedule["planned"]
    try:
        from acquire.soak.spec import parse_soak

        return parse_soak(job.load_plan()).schedule.total()
    except SweepdError:
        return None


def _merge_journal(job: Job, view: dict[str, Any]) -> None:
    """Counts, last sweep and last fault from the journal, the record of truth."""
    run_id = view["run_id"]
    if not run_id:
        return
    try:
        journal = history.open_for_job(job.output_dir)
    except JournalError:
        return
    try:
        counts = history.counts(journal, int(run_id))
        view["sweeps"].update(counts.to_dict())
        last = history.last_sweep(journal, int(run_id))
        if last is not None:
            previous = view.get("last_sweep") or {}
            view["last_sweep"] = {"index": last["seq"], "utc": last["time_utc"],
                                  "verdict": last["verdict"], "kept": last["state"] == "stored"}
            if previous.get("index") == last["seq"] and previous.get("utc"):
                view["last_sweep"]["utc"] = previous["utc"]
        faults = history.faults(journal, int(run_id), limit=1)
        if faults:
            f = faults[-1]
            view["last_fault"] = {"utc": f["time_utc"], "seq": f["seq"], "kind": f["kind"],
                                  "message": f["message"], "action": f["action"]}
        alarms = history.alarms(journal, int(run_id))
        view["alarms"] = {**(view.get("alarms") or {"active": []}), "count": len(alarms)}
        if alarms:
            a = alarms[-1]
            view["alarms"]["last"] = {"seq": a["seq"], "utc": a["time_utc"],
                                      "metric": a["metric"], "value": a["value"],
                                      "threshold": a["threshold"], "message": a["message"]}
    except JournalError:
        pass
    finally:
        journal.close()


def format_view(view: dict[str, Any]) -> str:
    """The human table plus a few detail lines per job."""
    daemon = view["daemon"]
    head = (f"sweepd serve: running (pid {daemon['pid']})" if daemon["running"]
            else "sweepd serve: not running") + f"; spool {view['spool']}"
    if not view["jobs"]:
        return head + "\nno jobs"
    rows = [("JOB", "STATE", "SWEEPS", "MISSED", "LAST", "NEXT", "DRIFT")]
    for job in view["jobs"]:
        sweeps = job["sweeps"]
        rows.append((
            job["id"], job["state"], sweeps_text({"sweeps": sweeps, "schedule":
                                                 {"planned": sweeps.get("planned")}}),
            str(sweeps.get("missed", 0)), (job.get("last_sweep") or {}).get("verdict") or "-",
            clock_text((job.get("next_sweep") or {}).get("due_utc")),
            drift_text({"drift": job.get("drift")}),
        ))
    widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]) - 1)]
    lines = [head]
    for index, row in enumerate(rows):
        lines.append("  ".join(c.ljust(w) for c, w in zip(row, widths, strict=False)) + "  "
                     + row[-1])
        if index == 0:
            continue
        lines.extend(_details(view["jobs"][index - 1]))
    return "\n".join(lines)


def _details(job: dict[str, Any]) -> list[str]:
    out = []
    if job.get("note"):
        out.append(f"    {job['note']}")
    fault = job.get("last_fault")
    if fault:
        out.append(f"    last fault {clock_text(fault['utc'])} {fault['kind']}: "
                   f"{_short(fault['message'])} -> {fault['action']}")
    alarms = job.get("alarms") or {}
    if alarms.get("count"):
        last = alarms.get("last") or {}
        active = ", ".join(alarms.get("active") or []) or "none active"
        out.append(f"    alarms {alarms['count']} ({active}); last: {last.get('message', '-')}")
    drift = job.get("drift") or {}
    allan = drift.get("allan_resonance") or []
    if not allan and drift.get("statistics") not in (None, "ready"):
        out.append(f"    statistics: {drift['statistics']}")
    if allan:
        from acquire.units import format_duration, format_frequency

        shown = ", ".join(f"{format_duration(p['tau_s'])}: {format_frequency(p['adev'])}"
                          for p in allan[:4])
        out.append(f"    Allan deviation of the resonance: {shown}")
    if job.get("eta_utc") and job["state"] in ACTIVE_STATES:
        out.append(f"    ends about {clock_text(job['eta_utc'])}")
    return out


def _short(text: str, limit: int = 110) -> str:
    return text if len(text) <= limit else text[: limit - 3] + "..."
