"""What judging a sweep against a limit mask found: per segment and for the whole mask.

``SegmentResult`` keeps every judged position (for plots) and gives the JSON form
(counts, failing ranges, the worst position) and the one-line summary; ``MaskResult``
is fail when any segment fails. The judging itself is ``acquire.masks.evaluate_mask``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from acquire.metrics.quantities import QUANTITIES, format_value
from acquire.units import format_frequency

if TYPE_CHECKING:
    from acquire.masks import Mask, Segment

MAX_FAILING_RANGES = 20


@dataclass(frozen=True)
class Worst:
    """The judged position with the smallest margin in a segment."""

    freq_hz: float
    value: float
    limit: float
    bound: str  # "upper" | "lower"
    margin: float

    def to_dict(self) -> dict[str, Any]:
        return {
            "freq_hz": self.freq_hz, "value": self.value, "limit": self.limit,
            "bound": self.bound, "margin": self.margin,
        }


@dataclass(frozen=True)
class SegmentResult:
    """How one segment judged a sweep.

    ``freq_hz``/``values``/``margins`` hold every judged position (sweep points and
    interpolated segment ends, sorted by frequency) for plots; they are not part of the
    JSON form, which carries counts, failing ranges and the worst position.
    """

    segment: Segment
    verdict: str  # "pass" | "fail" | "skipped"
    judged_from_hz: float | None = None
    judged_to_hz: float | None = None
    points_judged: int = 0
    worst: Worst | None = None
    freq_hz: np.ndarray = field(default_factory=lambda: np.empty(0))
    values: np.ndarray = field(default_factory=lambda: np.empty(0))
    margins: np.ndarray = field(default_factory=lambda: np.empty(0))

    @property
    def failing(self) -> np.ndarray:
        return self.margins < 0

    @property
    def clipped(self) -> bool:
        seg = self.segment
        return self.judged_from_hz != seg.from_hz or self.judged_to_hz != seg.to_hz

    def failing_ranges(self) -> list[tuple[float, float]]:
        """Frequency runs of consecutive failing positions (at most 20)."""
        bad = self.failing.astype(np.int8)
        if not bad.any():
            return []
        step = np.diff(np.concatenate([[0], bad, [0]]))
        starts = np.flatnonzero(step == 1)
        ends = np.flatnonzero(step == -1) - 1
        return [
            (float(self.freq_hz[a]), float(self.freq_hz[b]))
            for a, b in zip(starts[:MAX_FAILING_RANGES], ends[:MAX_FAILING_RANGES], strict=True)
        ]

    def to_dict(self) -> dict[str, Any]:
        seg = self.segment
        return {
            "index": seg.index,
            "name": seg.name,
            "parameter": seg.parameter,
            "quantity": seg.quantity,
            "unit": QUANTITIES[seg.quantity].unit,
            "from_hz": seg.from_hz,
            "to_hz": seg.to_hz,
            "upper": seg.upper.to_dict() if seg.upper else None,
            "lower": seg.lower.to_dict() if seg.lower else None,
            "verdict": self.verdict,
            "judged_from_hz": self.judged_from_hz,
            "judged_to_hz": self.judged_to_hz,
            "clipped": self.verdict != "skipped" and self.clipped,
            "positions_judged": int(self.freq_hz.size),
            "points_judged": self.points_judged,
            "positions_failed": int(self.failing.sum()),
            "failing_ranges_hz": [list(r) for r in self.failing_ranges()],
            "worst": self.worst.to_dict() if self.worst else None,
        }

    def summary(self, *, short: bool = False) -> str:
        """One line on the worst position; ``short`` leaves out what ``describe`` says."""
        seg = self.segment
        if self.verdict == "skipped":
            return "skipped (outside the sweep)" if short else f"'{seg.name}' skipped"
        w = self.worst
        assert w is not None
        value = format_value(seg.quantity, w.value)
        where = format_frequency(w.freq_hz)
        margin = format_value(seg.quantity, w.margin)
        if short:
            text = f"'{seg.name}' worst {value} at {where} ({w.bound}), margin {margin}"
        else:
            text = (
                f"'{seg.name}' worst {seg.parameter} {seg.quantity} {value} at {where} "
                f"({w.bound} {format_value(seg.quantity, w.limit)}, margin {margin})"
            )
        if self.verdict == "fail":
            text += f", {int(self.failing.sum())} of {self.freq_hz.size} positions fail"
        return text


@dataclass(frozen=True)
class MaskResult:
    """How a whole mask judged a sweep: fail if any segment fails."""

    mask: Mask
    segments: tuple[SegmentResult, ...]

    @property
    def verdict(self) -> str:
        return "fail" if any(s.verdict == "fail" for s in self.segments) else "pass"

    def worst(self) -> SegmentResult | None:
        """The judged segment with the smallest margin (margins are per quantity)."""
        judged = [s for s in self.segments if s.worst is not None]
        failing = [s for s in judged if s.verdict == "fail"]
        pool = failing or judged
        if not pool:
            return None
        # Compare relative to the limit size so SWR and dB margins can be ranked.
        return min(pool, key=lambda s: s.worst.margin / max(abs(s.worst.limit), 1e-30))

    def to_dict(self) -> dict[str, Any]:
        return {
            "mask": {
                "name": self.mask.name,
                "description": self.mask.description,
                "source": self.mask.source,
                "outside_sweep": self.mask.outside_sweep,
            },
            "segments": [s.to_dict() for s in self.segments],
        }
