"""``sweepd report``: what happened overnight, from the journal and the drift records.

Writes ``drift.png``, ``allan.png``, ``deviation.png``, ``summary.txt`` and ``summary.html``
(pictures embedded by file name) into the report folder, each atomically. The Allan
deviation is computed here from the journalled resonance of every sweep (missed sweeps
are gaps, see ``acquire.soak.allan``); the envelope from the per-point drift records of
the sweeps the journal holds, and from the same records the drift per hour for the
uncertainty budget (``acquire.soak.budget_drift``).
"""

from __future__ import annotations

import contextlib
from collections import Counter
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from acquire.journal import JOURNAL_NAME
from acquire.soak import history
from acquire.soak.alarms import LABELS
from acquire.soak.allan import AllanPoint
from acquire.soak.budget_drift import budget_line, soak_drift
from acquire.soak.devfile import read_deviation
from acquire.soak.report_pages import report_html, report_text
from acquire.soak.report_plots import Events, Panel, allan_plot, deviation_plot, drift_plot
from acquire.soak.sentences import FAULT_WORDS, fault_sentence
from acquire.soak.spec import SoakSpec, parse_soak
from acquire.soak.spool import Job, SpoolError
from acquire.soak.statistics import allan_points, trend_per_hour
from acquire.storage import replace_atomic
from acquire.units import format_duration, format_frequency
from acquire.utc import parse_utc


@dataclass
class Report:
    folder: Path
    text: str
    html: Path
    pictures: dict[str, Path]
    budget_drift: dict[str, Any] | None = None  # see acquire.soak.budget_drift


REPORT_FORMAT = "sweepd-report"
REPORT_VERSION = 1


def report_document(job: Job, report: Report) -> dict[str, Any]:
    """The report as the JSON document ``sweepd report --json`` prints."""
    return {
        "format": REPORT_FORMAT, "version": REPORT_VERSION, "job": job.id,
        "folder": str(report.folder), "html": str(report.html),
        "text_file": str(report.folder / "summary.txt"),
        "pictures": {name: str(path) for name, path in report.pictures.items()},
        "summary": report.text.splitlines(),
        "budget_drift": report.budget_drift,
    }


def _gather(job: Job) -> tuple[Any, SoakSpec, dict[str, Any], dict[str, Any], history.Series,
                               list[dict[str, Any]], list[dict[str, Any]]]:
    """Plan, soak spec, job state, journal run, series, faults and alarms of ``job``."""
    plan = job.load_plan()
    spec = parse_soak(plan)
    state = job.read_state()
    run_id = state.get("run_id")
    if run_id is None:
        raise SpoolError(f"job {job.id}: never ran (state {state.get('state')}); "
                         "nothing to report yet")
    with history.open_for_job(job.output_dir) as journal:
        run = journal.run(int(run_id))
        if run is None:
            raise SpoolError(f"job {job.id}: run {run_id} is not in {journal.where}")
        run_id = int(run["id"])
        ser = history.series(journal, run_id)
        faults = history.faults(journal, run_id)
        alarms = history.alarms(journal, run_id)
        run["holds"] = journal.holds(run_id)
    return plan, spec, state, run, ser, faults, alarms


def drift_png(job: Job) -> bytes:
    """Only the drift picture of ``job``, as PNG bytes (for the live status page)."""
    import tempfile

    _, spec, state, run, ser, faults, alarms = _gather(job)
    t_s = _times(ser, spec)
    with tempfile.TemporaryDirectory(prefix="sweepd-drift-") as tmp:
        path = _drift(Path(tmp), ser, spec, t_s, alarms, faults, f"soak {job.id}",
                      float(state.get("start_epoch") or 0.0), run.get("holds") or [])
        return path.read_bytes()


def write_report(job: Job, folder: Path) -> Report:
    """Build every part of the report for ``job`` into ``folder``."""
    plan, spec, state, run, ser, faults, alarms = _gather(job)
    folder.mkdir(parents=True, exist_ok=True)
    done = ser.done_mask()
    deviation = read_deviation(job.data_dir, set(ser.seq[done].tolist()))
    t_s = _times(ser, spec)
    title = f"soak {job.id}"
    pictures = {
        "drift": _drift(folder, ser, spec, t_s, alarms, faults, title,
                        float(state.get("start_epoch") or 0.0), run.get("holds") or []),
        "allan": _allan(folder, ser, spec, t_s, title),
    }
    if deviation is not None and deviation[1].size:
        pictures["deviation"] = _deviation(folder, deviation, spec, title)
    facts = _facts(job, plan, spec, run, ser, faults, alarms, t_s, deviation)
    facts["sweeps"] += _held_text(run.get("holds") or [])
    budget = soak_drift(spec, ser, deviation)
    facts["drift"].append(budget_line(budget))
    text = report_text(facts)
    replace_atomic(folder / "summary.txt", text + "\n")
    page = replace_atomic(folder / "summary.html", report_html(facts, pictures, folder))
    return Report(folder, text, page, pictures, budget)


# -- data ---------------------------------------------------------------------------------
def _times(ser: history.Series, spec: SoakSpec) -> np.ndarray:
    """Seconds since the start per row: measured ones as journalled, the rest from the
    schedule (or interpolated when sweeps ran back to back)."""
    t = ser.t_s.copy()
    gaps = ~np.isfinite(t)
    if gaps.any():
        if spec.schedule.every_s > 0:
            t[gaps] = ser.seq[gaps] * spec.schedule.every_s
        elif (~gaps).sum() >= 2:
            t[gaps] = np.interp(ser.seq[gaps], ser.seq[~gaps], t[~gaps])
        else:
            t[gaps] = 0.0
    return t


def _tau0(spec: SoakSpec, ser: history.Series, t_s: np.ndarray) -> float:
    if spec.schedule.every_s > 0:
        return spec.schedule.every_s
    ok = np.isfinite(ser.t_s)
    if ok.sum() >= 2:
        return float((ser.t_s[ok][-1] - ser.t_s[ok][0]) / (ser.seq[ok][-1] - ser.seq[ok][0]))
    return 0.0


def _resonance_by_index(ser: history.Series) -> np.ndarray:
    """The resonance per sweep index 0..last (nan for missed or absent)."""
    size = int(ser.seq.max()) + 1 if ser.seq.size else 0
    y = np.full(size, np.nan)
    y[ser.seq] = np.where(ser.done_mask(), ser.values("resonance_hz"), np.nan)
    return y


def _alarm_times(alarms: list[dict[str, Any]], ser: history.Series,
                 t_s: np.ndarray) -> list[tuple[float, str]]:
    where = {int(s): float(t) for s, t in zip(ser.seq, t_s, strict=True)}
    return [(where[a["seq"]], a["metric"]) for a in alarms if a["seq"] in where]


def _drift(folder: Path, ser: history.Series, spec: SoakSpec, t_s: np.ndarray,
           alarms: list[dict[str, Any]], faults: list[dict[str, Any]], title: str,
           start_epoch: float, holds: list[dict[str, Any]]) -> Path:
    done = ser.done_mask()
    th = spec.alarms
    panels: list[Panel] = []
    if spec.reflection:
        shift = np.where(done, ser.values("resonance_shift_hz"), np.nan)
        panels.append(Panel("resonance shift (kHz)", shift / 1e3,
                            th.resonance_shift_hz / 1e3 if th.resonance_shift_hz else None,
                            signed=True))
        panels.append(Panel("worst in-band SWR", np.where(done, ser.values("worst_swr"),
                                                          np.nan), th.worst_swr))
    panels.append(Panel(f"max |change| |{spec.parameter}| (dB)",
                        np.where(done, ser.values("max_db"), np.nan), th.deviation_db))
    panels.append(Panel(f"max |change| phase {spec.parameter} (deg)",
                        np.where(done, ser.values("max_deg"), np.nan), th.deviation_deg))
    where = {int(s): float(t) for s, t in zip(ser.seq, t_s, strict=True)}

    def times(rows: list[dict[str, Any]]) -> np.ndarray:
        """Where each event sits: at its sweep, else at its journalled time."""
        found = []
        for row in rows:
            if row.get("seq") in where:
                found.append(where[row["seq"]])
            elif start_epoch and row.get("time_utc"):
                with contextlib.suppress(ValueError):
                    found.append(_epoch(row["time_utc"]) - start_epoch)
        return np.array(found, dtype=float)

    missed = t_s[np.array([s == "missed" for s in ser.state], dtype=bool)] \
        if ser.seq.size else np.array([])
    events = Events(
        alarms=[(t, LABELS.get(m, m)) for t, m in _alarm_times(alarms, ser, t_s)],
        faults=times([f for f in faults if f.get("kind") != "restart"]),
        restarts=times([f for f in faults if f.get("kind") == "restart"]),
        missed=missed, held=_held_spans(holds, start_epoch, t_s))
    return drift_plot(folder / "drift.png", panels, t_s, events,
                      f"{title}: drift from the reference")


def _allan(folder: Path, ser: history.Series, spec: SoakSpec, t_s: np.ndarray,
           title: str) -> Path:
    points: list[dict[str, Any]] = []
    note = "the soak tracks a transmission: no resonance"
    if spec.reflection:
        found = _allan_points(ser, spec, t_s)
        if isinstance(found, str):
            note = found
        else:
            points = [p.to_dict() for p in found]
    return allan_plot(folder / "allan.png", points, spec.alarms.resonance_adev_hz,
                      f"{title}: stability of the resonance", note)


def _allan_points(ser: history.Series, spec: SoakSpec,
                  t_s: np.ndarray) -> list[AllanPoint] | str:
    y = _resonance_by_index(ser)
    times = np.full(y.size, np.nan)
    times[ser.seq] = np.where(ser.done_mask(), t_s, np.nan)
    return allan_points(y, times, _tau0(spec, ser, t_s), spec.minimums)


def _deviation(folder: Path, deviation: tuple[np.ndarray, ...], spec: SoakSpec,
               title: str) -> Path:
    freq, _seq, db, deg = deviation
    env_db = np.abs(db).max(axis=0)
    env_deg = np.abs(deg).max(axis=0)
    return deviation_plot(folder / "deviation.png", freq, env_db, env_deg, db[-1], deg[-1],
                          spec.band_hz, (spec.alarms.deviation_db, spec.alarms.deviation_deg),
                          f"{title}: change from the reference against frequency",
                          spec.parameter)


# -- facts, text and HTML ------------------------------------------------------------------
def _facts(job: Job, plan: Any, spec: SoakSpec, run: dict[str, Any], ser: history.Series,
           faults: list[dict[str, Any]], alarms: list[dict[str, Any]], t_s: np.ndarray,
           deviation: tuple[np.ndarray, ...] | None) -> dict[str, Any]:
    done = ser.done_mask()
    states = Counter(ser.state)
    verdicts = Counter(v for v, d in zip(ser.verdict, done, strict=True) if d and v)
    sched = spec.schedule
    every = f"every {format_duration(sched.every_s)}" if sched.every_s > 0 else "back to back"
    extent = (f"{sched.count} sweeps" if sched.count is not None else
              f"for {format_duration(sched.duration_s)}" if sched.duration_s is not None
              else "until cancelled")
    facts: dict[str, Any] = {
        "job": job.id, "plan": plan.name, "resource": job.resource,
        "run": f"run {run['id']} in {job.output_dir / JOURNAL_NAME}",
        "started": run.get("started_utc"), "ended": run.get("ended_utc"),
        "state": job.read_state().get("state"), "run_state": run.get("state"),
        "schedule": f"{every}, {extent}" + (f" ({sched.total()} planned)" if sched.total()
                                           and sched.count is None else ""),
        "sweeps": (f"{int(done.sum())} done ({states.get('stored', 0)} kept as Touchstone), "
                   f"{states.get('missed', 0)} missed, {states.get('failed', 0)} failed, "
                   f"{states.get('pending', 0)} pending"
                   + (f", {states['interrupted']} interrupted" if states.get("interrupted")
                      else "")),
        "verdicts": ", ".join(f"{n} {v}" for v, n in sorted(verdicts.items())) or "no checks",
        "drift": _drift_lines(spec, ser, t_s, done, deviation),
        "alarms": [f"{a['time_utc'][11:19]} UTC, sweep {a['seq']}: {a['message']}"
                   for a in alarms],
        "faults_by_kind": ", ".join(f"{FAULT_WORDS.get(k, k)}: {n}" for k, n in
                                    Counter(f["kind"] for f in faults).most_common()),
        "faults": [fault_sentence(f) for f in faults],
        "data_dir": str(job.data_dir),
        "instrument": _instruments(ser, run, job.resource),
        "calibration": _calibrations(ser, plan),
        "kept": [(int(q), Path(p)) for q, p, st in zip(ser.seq, ser.touchstone, ser.state,
                                                       strict=True) if p and st == "stored"],
    }
    return facts


def _held_spans(holds: list[dict[str, Any]], start_epoch: float, t_s: np.ndarray
                ) -> list[tuple[float, float]]:
    """Each hold for disk space as (from, to) seconds since the start; a hold still on
    ends at the last sweep's time (or where it began, if later)."""
    if not start_epoch:
        return []
    last = float(np.nanmax(t_s)) if t_s.size else 0.0
    spans = []
    for h in holds:
        try:
            begin = _epoch(str(h["started_utc"])) - start_epoch
            end = _epoch(str(h["ended_utc"])) - start_epoch if h.get("ended_utc") else None
        except (KeyError, ValueError):
            continue
        spans.append((begin, max(begin, last) if end is None else end))
    return spans


def _held_text(holds: list[dict[str, Any]]) -> str:
    """The sweeps not taken while held for disk space (one journal row per hold)."""
    spans = [(int(h["first_seq"]), h["last_seq"]) for h in holds]
    held = sum(max(0, int(last) - first + 1) for first, last in spans if last is not None)
    still = any(last is None for _, last in spans)
    if not spans:
        return ""
    return (f", {held} not taken while held for disk space ({len(spans)} hold(s)"
            + (", one still on" if still else "") + ")")


def _instruments(ser: history.Series, run: dict[str, Any], resource: str) -> list[str]:
    """Each instrument identity the sweeps were taken with, and over which sweeps."""
    spans: list[list[Any]] = []  # [identity, first seq, last seq]
    for seq, who in zip(ser.seq, ser.instrument, strict=True):
        if not who:
            continue
        if spans and spans[-1][0] == who:
            spans[-1][2] = int(seq)
        else:
            spans.append([who, int(seq), int(seq)])
    if not spans:
        who = run.get("instrument")
        return [f"{who} at {resource}" if who else f"at {resource} (identity not recorded)"]
    return [f"{who} at {resource}, sweeps {a}..{b}" for who, a, b in spans]


def _calibrations(ser: history.Series, plan: Any) -> list[str]:
    """Each calibration used: its id, method, when made and its age while in use."""
    from acquire.calibration.calset import SUFFIX, read_header
    from acquire.capture.calchoice import cal_dir_for

    ages: dict[str, list[float]] = {}
    for cal_id, age in zip(ser.cal_id, ser.cal_age_s, strict=True):
        if cal_id:
            ages.setdefault(cal_id, []).extend([float(age)] if age is not None else [])
    if not ages:
        return ["none: the sweeps are uncorrected (raw instrument data)"]
    lines = []
    for cal_id, seen in ages.items():
        detail = ""
        with contextlib.suppress(Exception):  # a missing or unreadable file: id and age only
            header = read_header(cal_dir_for(plan) / f"{cal_id}{SUFFIX}")
            detail = (f", method {header.get('method', 'unknown')}, made "
                      f"{header.get('created_utc', 'at an unknown time')}")
        age = (f", {format_duration(min(seen))} old at the first sweep and "
               f"{format_duration(max(seen))} at the last" if seen else "")
        lines.append(f"{cal_id}{detail}{age}")
    return lines


def _drift_lines(spec: SoakSpec, ser: history.Series, t_s: np.ndarray, done: np.ndarray,
                 deviation: tuple[np.ndarray, ...] | None) -> list[str]:
    lines = []
    if not done.any():
        return ["no sweep taken yet"]
    for key, label, unit in (("max_db", f"max |change| of |{spec.parameter}|", "dB"),
                             ("max_deg", f"max |change| of the phase of {spec.parameter}",
                              "deg")):
        v = np.where(done, ser.values(key), np.nan)
        if np.isfinite(v).any():
            i = int(np.nanargmax(v))
            lines.append(f"{label}: largest {v[i]:.4g} {unit} at sweep {ser.seq[i]}, "
                         f"last {v[np.flatnonzero(np.isfinite(v))[-1]]:.4g} {unit}")
    if spec.reflection:
        res = np.where(done, ser.values("resonance_hz"), np.nan)
        shift = np.where(done, ser.values("resonance_shift_hz"), np.nan)
        ok = np.isfinite(res) & np.isfinite(shift)
        if ok.any():
            ref = res[ok][0] - shift[ok][0]
            i = int(np.nanargmax(np.abs(np.where(ok, shift, np.nan))))
            lines.append(f"resonance: reference {format_frequency(ref)}, last shift "
                         f"{_signed(shift[ok][-1])}, largest {_signed(shift[i])} at sweep "
                         f"{ser.seq[i]}")
            trend = trend_per_hour(t_s, np.where(ok, shift, np.nan), spec.minimums)
            lines.append("resonance trend (least-squares line): " + (
                trend if isinstance(trend, str) else f"{_signed(trend)}/h"))
        swr = np.where(done, ser.values("worst_swr"), np.nan)
        rise = np.where(done, ser.values("worst_swr_rise"), np.nan)
        if np.isfinite(swr).any():
            i = int(np.nanargmax(swr))
            ref = swr[np.isfinite(swr)][0] - rise[np.isfinite(swr)][0]
            lines.append(f"worst in-band SWR: reference {ref:.4f}, largest {swr[i]:.4f} at "
                         f"sweep {ser.seq[i]}")
        curve = _allan_points(ser, spec, t_s)
        shown = curve if isinstance(curve, str) else "; ".join(
            f"tau {format_duration(p.tau_s)}: {format_frequency(p.adev)}" for p in curve[:6])
        lines.append(f"Allan deviation of the resonance: {shown}")
    if deviation is not None and deviation[1].size:
        freq, _seq, db, _deg = deviation
        env = np.abs(db).max(axis=0)
        i = int(np.argmax(env))
        lines.append(f"largest change of |{spec.parameter}| at any frequency: "
                     f"{env[i]:.4g} dB at {format_frequency(freq[i])}")
    return lines


def _epoch(utc: str) -> float:
    return parse_utc(utc).timestamp()


def _signed(hz: float) -> str:
    return f"{'+' if hz >= 0 else '-'}{format_frequency(abs(hz))}"
