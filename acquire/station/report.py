"""The summary of an output folder: yield and per-metric statistics, per plan.

Statistics are taken over stored measurements of real units (golden checks left out):
by default the first measurement of each unit in the selection (the process as it
produced the unit, before any rework), or every measurement with ``all_attempts``.
Frequencies are shown in MHz; the CSV export keeps base units.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from acquire.station.counters import Yield, count_yield
from acquire.station.records import Metric, Record, metric_order
from acquire.station.stats import Stats, describe

SCALE = {"Hz": (1e-6, "MHz")}
LABEL_WIDTH = 46


@dataclass
class MetricStats:
    metric: Metric
    stats: Stats
    note: str = ""


@dataclass
class PlanSummary:
    plan: str
    measurements: int
    states: dict[str, int]
    counters: Yield
    golden_checks: int = 0
    golden_failed: int = 0
    basis: str = ""
    metrics: list[MetricStats] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        return {
            "plan": self.plan, "measurements": self.measurements, "states": self.states,
            "yield": self.counters.to_dict(), "golden_checks": self.golden_checks,
            "golden_failed": self.golden_failed, "basis": self.basis,
            "metrics": [{"key": m.metric.key, "unit": m.metric.unit, **m.stats.to_dict(),
                         "note": m.note} for m in self.metrics],
        }


def summarise(records: Sequence[Record], golden: Sequence[Any] = (), *,
              all_attempts: bool = False) -> list[PlanSummary]:
    """One summary per plan; ``golden`` rows carry ``plan`` and ``passed``."""
    plans = list(dict.fromkeys(r["plan"] for r in records))
    plans += [p for p in dict.fromkeys(g["plan"] for g in golden) if p not in plans]
    out = []
    for plan in plans:
        mine = [r for r in records if r["plan"] == plan]
        states: dict[str, int] = {}
        for r in mine:
            states[r["state"]] = states.get(r["state"], 0) + 1
        units = [r for r in mine if r["state"] == "stored" and not r["golden"]]
        chosen = units if all_attempts else _first_of_each(units)
        checks = [g for g in golden if g["plan"] == plan]
        out.append(PlanSummary(
            plan=plan, measurements=len(mine), states=states,
            counters=count_yield(r.fields for r in units),
            golden_checks=len(checks), golden_failed=sum(1 for g in checks if not g["passed"]),
            basis=("every stored measurement" if all_attempts
                   else "the first measurement of each unit"),
            metrics=[_metric_stats(m, chosen) for m in metric_order(chosen)],
        ))
    return out


def _first_of_each(records: Sequence[Record]) -> list[Record]:
    seen: set[str] = set()
    chosen = []
    for rec in records:
        serial = rec["serial"]
        if serial and serial in seen:
            continue
        seen.add(serial)
        chosen.append(rec)
    return chosen


def _metric_stats(metric: Metric, records: Sequence[Record]) -> MetricStats:
    having = [r for r in records if metric.key in r.values]
    values = [r.values[metric.key] for r in having]
    limits = {r.limits[metric.key] for r in having if metric.key in r.limits}
    note = ""
    lsl = usl = None
    if len(limits) == 1:
        lsl, usl = next(iter(limits))
    elif len(limits) > 1:
        note = "limits changed within the selection: no Ppk or Cpk"
    return MetricStats(metric, describe(values, lsl, usl, [r["run_id"] for r in having]),
                       note)


def summary_lines(summaries: Sequence[PlanSummary]) -> list[str]:
    lines: list[str] = []
    for s in summaries:
        states = ", ".join(f"{n} {state}" for state, n in sorted(s.states.items()))
        lines.append(f"plan {s.plan}: {s.measurements} measurements ({states or 'none'}); "
                     f"golden checks {s.golden_checks} ({s.golden_failed} failed)")
        lines.append(f"  {s.counters.line()}")
        if not s.metrics:
            lines.append("  no metrics stored")
            lines.append("")
            continue
        lines.append(f"  statistics over {s.basis}; Ppk = min(USL - mean, mean - LSL)/(3 sd), "
                     "sd over all; Cpk the same with the pooled sd within runs")
        head = (f"  {'metric':{LABEL_WIDTH}s} {'unit':>5s} {'n':>4s} {'mean':>11s} {'sd':>11s} "
                f"{'min':>11s} {'max':>11s} {'LSL':>11s} {'USL':>11s} {'Ppk':>7s} "
                f"{'Cpk':>7s}")
        lines.append(head)
        for m in s.metrics:
            lines.append(_row(m))
        lines.append("")
    return lines[:-1] if lines and lines[-1] == "" else lines


def _row(m: MetricStats) -> str:
    factor, unit = SCALE.get(m.metric.unit, (1.0, m.metric.unit))
    st = m.stats

    def num(v: float | None, scale: float = factor) -> str:
        return f"{'-':>11s}" if v is None else f"{v * scale:11.6g}"

    label = m.metric.label
    if len(label) > LABEL_WIDTH:
        label = label[:LABEL_WIDTH - 3] + "..."
    ppk = f"{'-':>7s}" if st.ppk is None else f"{st.ppk:7.3f}"
    cpk = f"{'-':>7s}" if st.cpk is None else f"{st.cpk:7.3f}"
    row = (f"  {label:{LABEL_WIDTH}s} {unit or '-':>5s} {st.n:4d} {num(st.mean)} "
           f"{num(st.sd)} {num(st.min)} {num(st.max)} {num(st.lsl)} {num(st.usl)} {ppk} "
           f"{cpk}")
    return row + (f"  ({m.note})" if m.note else "")
