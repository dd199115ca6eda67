"""The verdict of a sweep: each check's result, the overall verdict and its exit code.

Overall: ``error`` if any check erred, else ``fail`` if any failed, else
``indeterminate`` if any was (guarded acceptance, see acquire/uncertainty/decision.py),
else ``pass``; ``none`` when there were no checks. Exit codes: 0 pass/none, 1 fail,
2 error, 3 indeterminate. The JSON form is documented in configs/masks/README.md
("Verdict JSON"); the text forms are one summary line, report lines and Touchstone
comment lines (ASCII). The checks themselves are in ``acquire.checks``.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from typing import Any

from acquire.jsonclean import json_safe
from acquire.mask_results import MaskResult
from acquire.uncertainty.decision import SIMPLE
from acquire.units import format_frequency

VERDICT_FORMAT = "sweepd-verdict"
VERDICT_VERSION = 1
EXIT_CODES = {"pass": 0, "none": 0, "fail": 1, "error": 2, "indeterminate": 3}


@dataclass(frozen=True)
class CheckResult:
    """One check's outcome. ``details`` is JSON-able; ``mask_result`` feeds plots."""

    kind: str
    name: str
    verdict: str  # "pass" | "fail" | "error" | "indeterminate" (guarded acceptance)
    summary: str  # one ASCII line
    details: dict[str, Any] = field(default_factory=dict)
    message: str | None = None  # the error, when verdict == "error"
    mask_result: MaskResult | None = None

    def to_dict(self) -> dict[str, Any]:
        return {
            "kind": self.kind, "name": self.name, "verdict": self.verdict,
            "summary": self.summary, "message": self.message, **self.details,
        }


@dataclass(frozen=True)
class Verdict:
    """All check results for one sweep, with the overall verdict and key metrics."""

    results: tuple[CheckResult, ...]
    sweep_info: dict[str, Any] = field(default_factory=dict)
    metrics: dict[str, Any] = field(default_factory=dict)
    decision: dict[str, Any] = field(default_factory=dict)

    @property
    def verdict(self) -> str:
        states = {r.verdict for r in self.results}
        for state in ("error", "fail", "indeterminate", "pass"):
            if state in states:
                return state
        return "none"

    @property
    def exit_code(self) -> int:
        return EXIT_CODES[self.verdict]

    @property
    def passed(self) -> bool:
        return self.verdict == "pass"

    def to_dict(self) -> dict[str, Any]:
        return {
            "format": VERDICT_FORMAT,
            "version": VERDICT_VERSION,
            "verdict": self.verdict,
            "exit_code": self.exit_code,
            "summary": self.summary_line(),
            "sweep": self.sweep_info,
            "checks": [r.to_dict() for r in self.results],
            "metrics": self.metrics,
            "decision": self.decision or _simple_decision(),
        }

    def to_json(self, indent: int | None = 2) -> str:
        """Stable JSON (keys in a fixed order, no NaN or infinity)."""
        return json.dumps(json_safe(self.to_dict()), indent=indent, allow_nan=False,
                          ensure_ascii=True)

    def summary_line(self) -> str:
        """One human line: ``PASS 3/3 checks | ...`` naming the worst or failing parts."""
        n = len(self.results)
        if not n:
            return "NO CHECKS"
        bad = [r for r in self.results if r.verdict != "pass"]
        head = f"{self.verdict.upper()} {n - len(bad)}/{n} checks pass"
        shown = bad or list(self.results)
        return " | ".join([head, *(r.summary for r in shown)])

    def metrics_line(self) -> str:
        """Key metrics of S11 (and S21) in one ASCII line."""
        return metrics_line(self.metrics)

    def report_lines(self) -> list[str]:
        """Several human lines: one per check, one per mask segment, failing ranges."""
        lines = [f"verdict: {self.verdict.upper()}"]
        for r in self.results:
            lines.extend(_check_lines(r, "  ", ranges=True))
        return lines

    def comment_lines(self) -> list[str]:
        """Lines for Touchstone comments (ASCII, without the leading ``!``)."""
        lines = [f"sweepd verdict: {self.verdict.upper()} (exit {self.exit_code})",
                 f"  decision rule: {(self.decision or _simple_decision())['statement']}"]
        for r in self.results:
            lines.extend(_check_lines(r, "  ", ranges=False))
        return [_ascii(line) for line in lines]


def _check_lines(r: CheckResult, indent: str, *, ranges: bool) -> list[str]:
    head = f"{indent}{r.verdict.upper():5s} "
    if r.message is not None:
        return [head + r.message]
    if r.kind != "mask" or r.mask_result is None:
        return [head + r.summary]
    lines = [head + r.name]
    for s in r.mask_result.segments:
        text = f"{s.segment.describe()}: {s.summary(short=True)}"
        lines.append(f"{indent}      {s.verdict:7s} {text}")
        if ranges:
            lines.extend(
                f"{indent}              fails {format_frequency(a)}..{format_frequency(b)}"
                for a, b in s.failing_ranges()
            )
    return lines


def metrics_line(metrics: dict[str, Any]) -> str:
    """``resonance 2.45 GHz, SWR 1.11, RL 25.6 dB, Z 45.0 + j0.0 ohm; SWR-2 band ...``."""
    parts = []
    s11 = metrics.get("S11", {})
    if "error" in s11:
        parts.append(f"S11: {s11['error']}")
    elif s11:
        where = "minimum |S11|" if s11["resonance_at_sweep_edge"] else "resonance"
        text = f"{where} {format_frequency(s11['resonance_hz'])}"
        if s11["swr_min"] is not None:
            text += f", SWR {s11['swr_min']:.3f}"
        if s11["return_loss_max_db"] is not None:
            text += f", RL {s11['return_loss_max_db']:.2f} dB"
        r, x = s11["impedance_at_resonance_ohm"]
        if r is not None and x is not None:
            text += f", Z {r:.1f} {'+' if x >= 0 else '-'} j{abs(x):.1f} ohm"
        parts.append(text)
        for key, label in (("bandwidth_swr2", "SWR-2 band"), ("bandwidth_rl10db", "RL-10 band")):
            band = s11.get(key, {})
            if band.get("lo_hz") is not None:
                open_ = " (to the sweep edge)" if band["edge_limited"] else ""
                parts.append(f"{label} {format_frequency(band['lo_hz'])}.."
                             f"{format_frequency(band['hi_hz'])} "
                             f"({format_frequency(band['width_hz'])}){open_}")
        if s11.get("q_unloaded") is not None:
            parts.append(f"Q0 {s11['q_unloaded']:.1f}, QL {s11['q_loaded']:.1f}")
    s21 = metrics.get("S21")
    if s21:
        parts.append(f"|S21| {s21['db_min']:.2f} dB at {format_frequency(s21['db_min_hz'])} "
                     f"to {s21['db_max']:.2f} dB at {format_frequency(s21['db_max_hz'])}")
    return _ascii("; ".join(parts) or "no metrics")


def _ascii(text: str) -> str:
    return text.encode("ascii", "replace").decode("ascii").replace("\n", " ")


def _simple_decision() -> dict[str, Any]:
    return SIMPLE.to_dict()
