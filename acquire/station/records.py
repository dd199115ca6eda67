"""Journal rows as records with named metric values and the limits that apply to them.

Values come from what was stored with each measurement: the key metrics and key figures
(``metrics_json``) and the check results (``verdict_json``). Limits come from the checks
themselves, so Ppk and Cpk are always taken against the limits the unit was judged by:

- a mask segment with one flat limit: its worst value against that limit (USL for an
  upper limit, LSL for a lower one); a sloped or two-sided segment: its worst margin
  against 0 (margin = distance to the limit, negative when failing);
- a bandwidth check: the measured width against the required one (LSL);
- a resonance check: the resonance against its window (LSL and USL);
- a worst-SWR check: the worst SWR against its maximum (USL).
"""

from __future__ import annotations

import json
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

from acquire.journal import JournalStore

# key, label, unit, path into metrics_json
BASE_METRICS: tuple[tuple[str, str, str, tuple[str, ...]], ...] = (
    ("resonance_hz", "resonance (min |S11|)", "Hz", ("S11", "resonance_hz")),
    ("swr_at_resonance", "SWR at resonance", "", ("S11", "swr_min")),
    ("return_loss_max_db", "return loss at resonance", "dB", ("S11", "return_loss_max_db")),
    ("bandwidth_swr2_hz", "bandwidth SWR <= 2", "Hz", ("S11", "bandwidth_swr2", "width_hz")),
    ("bandwidth_rl10db_hz", "bandwidth RL >= 10 dB", "Hz",
     ("S11", "bandwidth_rl10db", "width_hz")),
    ("q_unloaded", "unloaded Q", "", ("S11", "q_unloaded")),
    ("usable_bandwidth_hz", "usable bandwidth", "Hz", ("key_figures", "usable_bandwidth_hz")),
    ("worst_swr_in_band", "worst SWR in band", "", ("key_figures", "worst_swr_in_band")),
    ("s21_db_min", "|S21| minimum", "dB", ("S21", "db_min")),
    ("s21_db_max", "|S21| maximum", "dB", ("S21", "db_max")),
)
WORST_MARGIN = ("worst_margin", "worst mask margin", "")

COLUMNS = ("id", "run_id", "plan", "station", "time_utc", "serial", "attempt", "golden",
           "state", "verdict", "judged", "worst_margin", "cal_id", "instrument", "touchstone",
           "summary")
DERIVED = ("judged",)  # 1 when the measurement has a verdict, 0 when it is unjudged


@dataclass(frozen=True)
class Metric:
    key: str
    label: str
    unit: str


@dataclass
class Record:
    """One journalled measurement with its metric values and limits."""

    fields: dict[str, Any]
    values: dict[str, float | None] = field(default_factory=dict)
    limits: dict[str, tuple[float | None, float | None]] = field(default_factory=dict)
    metrics: dict[str, Metric] = field(default_factory=dict)

    def __getitem__(self, key: str) -> Any:
        return self.fields[key]


def query_records(journal: JournalStore, *, since_utc: str | None = None, plan: str | None = None
                  ) -> list[Record]:
    """Every measurement row (all states), oldest first, as records."""
    return [record(row) for row in journal.measurements(since_utc=since_utc, plan=plan)]


def record(row: Any) -> Record:
    rec = Record({name: row[name] for name in COLUMNS if name not in DERIVED})
    rec.fields["judged"] = int(row["verdict"] not in (None, "none"))
    metrics = _json(row["metrics_json"])
    for key, label, unit, path in BASE_METRICS:
        value = _dig(metrics, path)
        if value is not None:
            _put(rec, Metric(key, label, unit), value)
    if row["worst_margin"] is not None:
        _put(rec, Metric(*WORST_MARGIN), row["worst_margin"])
    verdict = _json(row["verdict_json"])
    for check in verdict.get("checks") or ():
        if check.get("verdict") != "error":
            _check_metrics(rec, check)
    return rec


def metric_order(records: Iterable[Record]) -> list[Metric]:
    """All metrics found, base metrics first, then check metrics in order of appearance."""
    seen: dict[str, Metric] = {}
    for rec in records:
        for key, metric in rec.metrics.items():
            seen.setdefault(key, metric)
    base = [k for k, *_ in BASE_METRICS] + [WORST_MARGIN[0]]
    ordered = [seen[k] for k in base if k in seen]
    return ordered + [m for k, m in seen.items() if k not in base]


def _check_metrics(rec: Record, check: dict[str, Any]) -> None:
    kind, name = check.get("kind"), check.get("name", "")
    if kind == "mask":
        for seg in check.get("segments") or ():
            worst = seg.get("worst") or {}
            if worst.get("value") is None:
                continue
            upper, lower = seg.get("upper"), seg.get("lower")
            flat_upper = upper is not None and lower is None and upper["from"] == upper["to"]
            flat_lower = lower is not None and upper is None and lower["from"] == lower["to"]
            base = f"{name} [{seg.get('name')}]"
            if flat_upper or flat_lower:
                limits = (None, upper["from"]) if flat_upper else (lower["from"], None)
                _put(rec, Metric(f"{base} worst {seg.get('quantity')}",
                                 f"{base} worst {seg.get('quantity')}", seg.get("unit") or ""),
                     worst["value"], limits)
            elif worst.get("margin") is not None:
                _put(rec, Metric(f"{base} margin", f"{base} margin", seg.get("unit") or ""),
                     worst["margin"], (0.0, None))
    elif kind == "bandwidth" and check.get("measured_hz") is not None:
        _put(rec, Metric(f"{name}: width", f"{name}: width", "Hz"), check["measured_hz"],
             (check.get("required_hz"), None))
    elif kind == "resonance" and check.get("resonance_hz") is not None:
        lo, hi = check.get("within_hz") or (None, None)
        _put(rec, Metric(f"{name}: resonance", f"{name}: resonance", "Hz"),
             check["resonance_hz"], (lo, hi))
    elif kind == "worst_swr" and check.get("worst_swr") is not None:
        _put(rec, Metric(f"{name}: worst", f"{name}: worst", ""), check["worst_swr"],
             (None, check.get("at_most")))


def _put(rec: Record, metric: Metric, value: Any,
         limits: tuple[float | None, float | None] = (None, None)) -> None:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return
    rec.values[metric.key] = number
    rec.limits[metric.key] = limits
    rec.metrics[metric.key] = metric


def _dig(data: Any, path: Sequence[str]) -> Any:
    for part in path:
        if not isinstance(data, dict):
            return None
        data = data.get(part)
    return data


def _json(text: str | None) -> dict[str, Any]:
    if not text:
        return {}
    try:
        value = json.loads(text)
    except ValueError:
        return {}
    return value if isinstance(value, dict) else {}
