"""Limit masks: YAML files of frequency segments with upper and/or lower limits.

The file format is documented in ``configs/masks/README.md``. Rules of evaluation:

- each segment judges every sweep point with ``from <= f <= to`` and also the segment
  ends themselves, where the quantity is interpolated linearly between the two sweep
  points around the end (an edge rarely falls on a point, and a failure may lie
  between the last point inside and the edge);
- a limit may slope linearly from its value at ``from`` to its value at ``to``;
- a value exactly on a limit passes (within 1e-12 of the limit, relative, to absorb
  rounding in unit conversions); the margin is ``upper - value`` or ``value - lower``
  (negative = failing);
- segments may overlap; each is judged on its own, so a point must satisfy all;
- NaN or inf in the judged data (or a quantity that does not exist there, such as SWR
  at |Γ| >= 1) is an error, never a pass;
- a segment must lie inside the sweep (``outside_sweep: error``, the default), or,
  with ``outside_sweep: clip``, only its overlap with the sweep is judged and a
  segment with no overlap is reported as skipped.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from acquire.errors import MaskError
from acquire.mask_results import MaskResult, SegmentResult, Worst
from acquire.metrics.quantities import QUANTITIES, finish, format_value, trace
from acquire.sweep import Sweep
from acquire.units import format_frequency
from acquire.yamlfile import Node, load_yaml, show

OUTSIDE_RULES = ("error", "clip")
_PARAM = re.compile(r"^[Ss]([1-9])([1-9])$")
# Sweep ends may differ from a mask edge by rounding in a file (frequencies written in
# GHz with a few digits); ends closer than this relative distance count as equal.
EDGE_RTOL = 1e-9
ON_LIMIT_RTOL = 1e-12


@dataclass(frozen=True)
class Limit:
    """A limit line over a segment: ``start`` at ``from``, ``stop`` at ``to``."""

    start: float
    stop: float

    def __post_init__(self) -> None:
        if not (math.isfinite(self.start) and math.isfinite(self.stop)):
            raise MaskError(f"a limit must be a finite number, got {self.start}..{self.stop}")

    @property
    def sloped(self) -> bool:
        return self.start != self.stop

    def at(self, freq_hz: np.ndarray, lo_hz: float, hi_hz: float) -> np.ndarray:
        f = np.asarray(freq_hz, dtype=np.float64)
        if not self.sloped or hi_hz == lo_hz:
            return np.full(f.shape, self.start)
        t = (f - lo_hz) / (hi_hz - lo_hz)
        return self.start + (self.stop - self.start) * t

    def to_dict(self) -> dict[str, float]:
        return {"from": self.start, "to": self.stop}


@dataclass(frozen=True)
class Segment:
    """One frequency range with limits on one quantity of one S-parameter."""

    index: int
    name: str
    parameter: str
    quantity: str
    from_hz: float
    to_hz: float
    upper: Limit | None
    lower: Limit | None
    aperture: int = 1

    @property
    def label(self) -> str:
        return f"segments[{self.index}] '{self.name}'"

    def describe(self) -> str:
        parts = []
        for bound, limit in (("upper", self.upper), ("lower", self.lower)):
            if limit is not None:
                text = format_value(self.quantity, limit.start)
                if limit.sloped:
                    text += " to " + format_value(self.quantity, limit.stop)
                parts.append(f"{bound} {text}")
        return (
            f"{self.parameter} {self.quantity} {format_frequency(self.from_hz)}.."
            f"{format_frequency(self.to_hz)} {', '.join(parts)}"
        )


@dataclass(frozen=True)
class Mask:
    """A parsed mask file."""

    name: str
    description: str
    source: str
    segments: tuple[Segment, ...]
    outside_sweep: str = "error"

    @property
    def parameters(self) -> frozenset[str]:
        """The S-parameters a sweep must hold for this mask."""
        return frozenset(s.parameter for s in self.segments)

    def evaluate(self, sweep: Sweep) -> MaskResult:
        """Judge a sweep; raises ``MaskError`` when the mask cannot be applied."""
        return evaluate_mask(self, sweep)


# -- loading -------------------------------------------------------------------------


def load_mask(path: Path | str) -> Mask:
    """Read and validate a mask file; errors name the file and key path."""
    path = Path(path)
    data = load_yaml(path, "mask", MaskError)
    node = Node(data, f"mask {path}", error=MaskError, base_dir=path.parent)
    return parse_mask(node, default_name=path.stem, source=str(path))


def parse_mask(node: Node, *, default_name: str, source: str) -> Mask:
    """Validate a loaded mask document (see configs/masks/README.md)."""
    node.mapping(
        ["name", "description", "parameter", "quantity", "aperture", "outside_sweep",
         "segments"],
        required=["segments"],
    )
    name = node["name"].text(default_name)
    description = node["description"].text("")
    defaults = {
        "parameter": _parameter(node["parameter"], "S11"),
        "quantity": _quantity(node["quantity"], None),
        "aperture": _aperture(node["aperture"], 1),
    }
    outside = node["outside_sweep"].text("error", choices=OUTSIDE_RULES)
    segments = tuple(
        _segment(i, seg, defaults)
        for i, seg in enumerate(node["segments"].elements(min_len=1))
    )
    return Mask(name, description, source, segments, outside)


def _segment(index: int, node: Node, defaults: dict[str, Any]) -> Segment:
    node.mapping(
        ["name", "from", "to", "parameter", "quantity", "aperture", "upper", "lower"],
        required=["from", "to"],
    )
    name = node["name"].text(f"segment {index + 1}")
    parameter = _parameter(node["parameter"], defaults["parameter"])
    quantity = _quantity(node["quantity"], defaults["quantity"])
    if quantity is None:
        node["quantity"].fail(f"is required here or at the top (one of {', '.join(QUANTITIES)})")
    info = QUANTITIES[quantity]
    if info.reflection_only and parameter[1] != parameter[2]:
        where = node["parameter"] if node["parameter"].present else node["quantity"]
        where.fail(f"{quantity} needs a reflection parameter (S11, S22, ...), got {parameter}")
    aperture = _aperture(node["aperture"], defaults["aperture"])
    lo = node["from"].quantity("frequency", lo=0.0)
    hi = node["to"].quantity("frequency", lo=0.0)
    if hi < lo:
        node["to"].fail(f"must not lie below from ({format_frequency(lo)})")
    upper = _limit(node["upper"], quantity)
    lower = _limit(node["lower"], quantity)
    if upper is None and lower is None:
        node.fail("needs an upper or a lower limit (or both)")
    for limit, key in ((upper, "upper"), (lower, "lower")):
        if limit is not None and limit.sloped and hi == lo:
            node[key].fail("a sloped limit needs a segment with from < to")
    if upper and lower and (lower.start > upper.start or lower.stop > upper.stop):
        node["lower"].fail("lies above the upper limit; nothing could pass")
    return Segment(index, name, parameter, quantity, lo, hi, upper, lower, aperture)


def _parameter(node: Node, default: str) -> str:
    if not node.present:
        return default
    text = node.text()
    if not _PARAM.match(text.strip()):
        node.fail(f"must be an S-parameter name such as S11 or S21, got {show(text)}")
    return text.strip().upper()


def _quantity(node: Node, default: str | None) -> str | None:
    if not node.present:
        return default
    return node.text(choices=QUANTITIES)


def _aperture(node: Node, default: int) -> int:
    value = node.integer(default, lo=1, hi=1001)
    if value % 2 == 0:
        node.fail(f"must be an odd number of points, got {value}")
    return value


def _limit(node: Node, quantity: str) -> Limit | None:
    if not node.present:
        return None
    if isinstance(node.value, dict):
        node.mapping(["from", "to"], required=["from", "to"])
        return Limit(_limit_value(node["from"], quantity), _limit_value(node["to"], quantity))
    value = _limit_value(node, quantity)
    return Limit(value, value)


def _limit_value(node: Node, quantity: str) -> float:
    kind = QUANTITIES[quantity].unit_kind
    if kind is None:  # SWR: a plain number, at least 1
        return node.number(lo=1.0)
    return node.quantity(kind)


# -- evaluation ----------------------------------------------------------------------


def evaluate_mask(mask: Mask, sweep: Sweep) -> MaskResult:
    """Judge ``sweep`` against every segment of ``mask`` (see module rules)."""
    if sweep.points == 0:
        raise MaskError(f"mask {mask.name}: the sweep holds no points")
    traces: dict[tuple[str, str, int], np.ndarray] = {}
    results = []
    for seg in mask.segments:
        key = (seg.parameter, seg.quantity, seg.aperture)
        if key not in traces:
            traces[key] = _trace(mask, seg, sweep)
        results.append(_evaluate_segment(mask, seg, sweep, traces[key]))
    return MaskResult(mask, tuple(results))


def _where(mask: Mask, seg: Segment) -> str:
    return f"mask {mask.name}: {seg.label}"


def _trace(mask: Mask, seg: Segment, sweep: Sweep) -> np.ndarray:
    i, j = int(seg.parameter[1]), int(seg.parameter[2])
    if max(i, j) > sweep.ports:
        raise MaskError(
            f"{_where(mask, seg)}: needs {seg.parameter} but the sweep has "
            f"{sweep.ports} port{'s' if sweep.ports > 1 else ''}"
        )
    if seg.quantity == "group_delay" and sweep.points < max(2, seg.aperture):
        raise MaskError(
            f"{_where(mask, seg)}: group delay needs at least {max(2, seg.aperture)} "
            f"sweep points, the sweep has {sweep.points}"
        )
    with np.errstate(all="ignore"):
        return trace(sweep, seg.parameter, seg.quantity, seg.aperture)


def _evaluate_segment(mask: Mask, seg: Segment, sweep: Sweep, values: np.ndarray) -> SegmentResult:
    f = sweep.freq_hz
    tol = EDGE_RTOL * max(abs(float(f[-1])), 1.0)
    lo, hi = seg.from_hz, seg.to_hz
    if lo < f[0] - tol or hi > f[-1] + tol:
        if mask.outside_sweep == "error":
            raise MaskError(
                f"{_where(mask, seg)}: {format_frequency(lo)}..{format_frequency(hi)} is not "
                f"inside the sweep {format_frequency(f[0])}..{format_frequency(f[-1])}; "
                "a mask judges only measured frequencies (or set outside_sweep: clip)"
            )
        if hi < f[0] - tol or lo > f[-1] + tol:
            return SegmentResult(seg, "skipped")
    jlo, jhi = max(lo, float(f[0])), min(hi, float(f[-1]))
    inside = np.flatnonzero((f >= jlo - tol) & (f <= jhi + tol))
    # Raw data used: the points inside plus their neighbours for edge interpolation.
    first = max(int(np.searchsorted(f, jlo - tol)) - 1, 0)
    last = min(int(np.searchsorted(f, jhi + tol, side="right")) + 1, f.size)
    used = np.arange(first, last)
    _require_finite(mask, seg, sweep, used, values)
    edges = [e for e in {jlo, jhi} if not np.any(np.abs(f[inside] - e) <= tol)]
    edge_f = np.array(sorted(edges), dtype=np.float64)
    edge_v = np.interp(edge_f, f, values)
    freq = np.concatenate([f[inside], edge_f])
    vals = finish(seg.quantity, np.concatenate([values[inside], edge_v]))
    order = np.argsort(freq, kind="stable")
    freq, vals = freq[order], vals[order]
    margins, worst = _margins(seg, freq, vals)
    if not np.isfinite(margins).all():  # never a verdict from NaN (it passes every "< 0")
        raise MaskError(f"{_where(mask, seg)}: a margin is not a finite number; no verdict")
    verdict = "fail" if bool((margins < 0).any()) else "pass"
    return SegmentResult(seg, verdict, jlo, jhi, int(inside.size), worst, freq, vals, margins)


def _require_finite(
    mask: Mask, seg: Segment, sweep: Sweep, used: np.ndarray, values: np.ndarray
) -> None:
    raw = sweep.param(seg.parameter)[used]
    bad = ~np.isfinite(raw)
    if bad.any():
        k = int(used[np.argmax(bad)])
        raise MaskError(
            f"{_where(mask, seg)}: {seg.parameter} is not a finite number at "
            f"{format_frequency(sweep.freq_hz[k])} (point {k}); a verdict needs finite data"
        )
    bad = ~np.isfinite(values[used])
    if bad.any():
        k = int(used[np.argmax(bad)])
        why = ""
        if seg.quantity == "swr":
            why = f" (|{seg.parameter}| = {abs(sweep.param(seg.parameter)[k]):.4g} >= 1: no SWR)"
        raise MaskError(
            f"{_where(mask, seg)}: {seg.quantity} of {seg.parameter} does not exist at "
            f"{format_frequency(sweep.freq_hz[k])} (point {k}){why}; check the calibration"
        )


def _margins(seg: Segment, freq: np.ndarray, vals: np.ndarray) -> tuple[np.ndarray, Worst]:
    margin = np.full(freq.shape, np.inf)
    limit = np.zeros(freq.shape)
    bound = np.zeros(freq.shape, dtype=bool)  # True = upper decides
    if seg.upper is not None:
        up = seg.upper.at(freq, seg.from_hz, seg.to_hz)
        margin = up - vals
        limit = up
        bound[:] = True
    if seg.lower is not None:
        low = seg.lower.at(freq, seg.from_hz, seg.to_hz)
        m_low = vals - low
        take = m_low < margin
        margin = np.where(take, m_low, margin)
        limit = np.where(take, low, limit)
        bound &= ~take
    # Values within ON_LIMIT_RTOL of a limit are on it: a unit conversion (SWR from |Γ|,
    # dB from a linear magnitude) may land one rounding step beyond an exact limit.
    on_limit = np.abs(margin) <= ON_LIMIT_RTOL * np.maximum(np.abs(limit), 1.0)
    margin = np.where(on_limit, 0.0, margin)
    k = int(np.argmin(margin))
    worst = Worst(float(freq[k]), float(vals[k]), float(limit[k]),
                  "upper" if bound[k] else "lower", float(margin[k]))
    return margin, worst
