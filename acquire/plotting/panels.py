"""The frequency panels of the page: match (SWR, return loss or Sii dB), any other
quantity (|Sij| dB, phase, group delay) and impedance (R and X), each with its mask
limits drawn, the forbidden side hatched and failing positions marked.

A panel draws one or more traces: the parameters it shows (S11 and S22 on the match
axis of a two-port) or, in an overlay, the same parameter of several files.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from acquire import metrics as m
from acquire.masks import SegmentResult
from acquire.metrics.quantities import QUANTITIES, finish, format_value, trace
from acquire.plotting.common import (
    FAIL,
    GRID,
    HATCH,
    INK,
    LIMIT,
    SHADE,
    STYLES,
    line_width,
    style,
    value_range,
)
from acquire.plotting.markers import Mark, draw_mark_lines, draw_marks
from acquire.sweep import Sweep
from acquire.uncertainty.plot import draw_band
from acquire.units import format_frequency

MATCH_QUANTITIES = ("swr", "return_loss", "magnitude_db")
MAX_CROSSES = 20
SWR_TOP_MAX = 10.0  # the SWR axis stops here; higher values leave the top of the panel
Z_SPAN_MAX = 10.0  # R/X axis limited to ±10·Z0 so a near-open does not flatten the rest

Group = list[tuple[str, SegmentResult]]  # (mask name, segment result)


@dataclass(frozen=True)
class Trace:
    """One line to draw: a parameter of a sweep, with its legend name."""

    sweep: Sweep
    param: str
    name: str


# -- value conversions for the match axis --------------------------------------------


def to_gamma(quantity: str, values: np.ndarray) -> np.ndarray:
    v = np.asarray(values, dtype=np.float64)
    if quantity == "swr":
        return (v - 1.0) / (v + 1.0)
    if quantity == "return_loss":
        return 10.0 ** (-v / 20.0)
    return 10.0 ** (v / 20.0)  # magnitude_db


def display(scale: str, gamma_abs: np.ndarray) -> np.ndarray:
    if scale == "swr":
        return m.swr(gamma_abs)
    if scale == "return_loss":
        return m.return_loss_db(gamma_abs)
    return m.db20(gamma_abs)


def _rises_with_gamma(name: str) -> bool:
    return name != "return_loss"


# -- limits, failures and verdict notes ----------------------------------------------


def draw_limits(ax: Any, segs: Group, convert, flip: bool, span_hz: float) -> None:
    """Limit lines (dashed), forbidden side hatched, failing positions as crosses."""
    seen_masks: set[str] = set()
    drawn: set[tuple[str, int, str]] = set()  # an overlay passes each segment once per file
    low, high = ax.get_ylim()
    for mask_name, seg_res in segs:
        seg = seg_res.segment
        if seg_res.verdict == "skipped":
            continue
        fs = np.linspace(seg.from_hz, seg.to_hz, 64)
        for bound, limit in (("upper", seg.upper), ("lower", seg.lower)):
            if limit is None or (mask_name, seg.index, bound) in drawn:
                continue
            drawn.add((mask_name, seg.index, bound))
            line = convert(seg.quantity, limit.at(fs, seg.from_hz, seg.to_hz))
            upper_side = (bound == "upper") != flip
            label = None if mask_name in seen_masks else f"limit: {mask_name}"
            seen_masks.add(mask_name)
            ax.plot(fs, line, color=LIMIT, linestyle="--", linewidth=2.0, label=label, zorder=3)
            edge = high if upper_side else low
            ax.fill_between(fs, line, edge, facecolor=SHADE, edgecolor=HATCH, hatch="///",
                            linewidth=0.0, zorder=1)
        _draw_failures(ax, seg_res, convert, (low, high), span_hz)
    ax.set_ylim(low, high)
    verdict_note(ax, segs)


def _draw_failures(ax: Any, seg_res: SegmentResult, convert, ylim: tuple[float, float],
                   span_hz: float) -> None:
    bad = np.flatnonzero(seg_res.failing)
    if not bad.size:
        return
    known = "fails the mask" in ax.get_legend_handles_labels()[1]
    # At most MAX_CROSSES crosses per segment (always the worst one), so a long
    # failing stretch does not bury the trace; the strip below shows every range.
    pick = bad[:: max(1, bad.size // MAX_CROSSES)]
    pick = np.union1d(pick, [int(np.argmin(seg_res.margins))])
    ys = convert(seg_res.segment.quantity, seg_res.values[pick])
    # Failing values off the axis are pinned to its edge so they stay visible.
    ax.plot(seg_res.freq_hz[pick], np.clip(ys, *ylim), linestyle="none",
            marker="X", markersize=9, markerfacecolor=FAIL, markeredgecolor=INK,
            markeredgewidth=0.8, zorder=5, clip_on=False,
            label=None if known else "fails the mask")
    fail_strip(ax, seg_res, 0.004 * span_hz)


def fail_strip(ax: Any, seg_res: SegmentResult, min_width: float) -> None:
    """A dark hatched bar along the bottom of the panel over every failing range."""
    for lo, hi in seg_res.failing_ranges():
        if hi - lo < min_width:
            mid = 0.5 * (lo + hi)
            lo, hi = mid - min_width / 2, mid + min_width / 2
        ax.axvspan(lo, hi, ymin=0.0, ymax=0.035, facecolor=FAIL, edgecolor=INK,
                   hatch="xxx", linewidth=0.6, zorder=6)


def verdict_note(ax: Any, segs: Group) -> None:
    """Panel title: one line per judged segment with verdict, worst value and margin."""
    lines = []
    for _, seg_res in segs:
        w = seg_res.worst
        if w is None:
            continue
        q = seg_res.segment.quantity
        seg = seg_res.segment
        lines.append(f"{seg_res.verdict.upper()}  '{seg.name}': worst {seg.parameter} {q} "
                     f"{format_value(q, w.value)} at {format_frequency(w.freq_hz)}, "
                     f"margin {format_value(q, w.margin)}")
    if lines:
        ax.set_title("\n".join(lines), loc="left", fontsize=8.5, family="monospace")


def limit_values(segs: Group, convert) -> list[float]:
    vals: list[float] = []
    for _, seg_res in segs:
        seg = seg_res.segment
        for limit in (seg.upper, seg.lower):
            if limit is not None:
                vals += list(convert(seg.quantity, np.array([limit.start, limit.stop])))
    return vals


def _span(traces: Sequence[Trace]) -> float:
    f = traces[0].sweep.freq_hz
    return float(f[-1] - f[0])


def _legend(ax: Any) -> None:
    if ax.get_legend_handles_labels()[1]:
        ax.legend(loc="best", fontsize=8, framealpha=0.9)


# -- the panels ------------------------------------------------------------------------


def match_panel(ax: Any, traces: Sequence[Trace], scale: str, segs: Group,
                marks: list[Mark]) -> None:
    """Reflections on one match axis (SWR, positive return loss or dB), with limits."""
    def convert(quantity: str, values: np.ndarray) -> np.ndarray:
        return display(scale, to_gamma(quantity, values))

    curves = [display(scale, np.abs(t.sweep.param(t.param))) for t in traces]
    extra = limit_values(segs, convert)
    every = np.concatenate(curves)
    if scale == "swr":
        finite = every[np.isfinite(every)]
        top = min(max([float(np.max(finite)) if finite.size else 2.0, *extra]) * 1.08,
                  max([SWR_TOP_MAX, *extra]))
        ax.set_ylim(1.0, max(top, 1.2))
    elif scale == "return_loss":
        ax.set_ylim(*value_range(every, [*extra, 0.0]))  # keep RL 0 dB (total reflection)
    else:
        ax.set_ylim(*value_range(every, extra))
    suffix = {"swr": "SWR", "return_loss": "return loss", "s_db": "(dB)"}[scale]
    for i, (t, ys) in enumerate(zip(traces, curves, strict=True)):
        ax.plot(t.sweep.freq_hz, ys, color=INK, linewidth=line_width(ys.size),
                linestyle=STYLES[i % len(STYLES)], label=f"{t.name} {suffix}", zorder=4)
        # |S| +/- U, when the capture's uncertainty is known
        draw_band(ax, t.sweep, t.param, lambda g: display(scale, g))
    flip_for = {q: _rises_with_gamma(q) != _rises_with_gamma(scale) for q in MATCH_QUANTITIES}
    # Limits of any match quantity share the axis; the bound flips with the direction.
    by_flip: dict[bool, Group] = {}
    for item in segs:
        by_flip.setdefault(flip_for[item[1].segment.quantity], []).append(item)
    for flip, items in by_flip.items():
        draw_limits(ax, items, convert, flip, _span(traces))
    shown = {t.param for t in traces}
    mine = [mk for mk in marks if mk.parameter in shown]
    draw_marks(ax, mine, [float(display(scale, abs(mk.marker.value))) for mk in mine])
    first = traces[0].param
    style(ax, {"swr": "SWR", "return_loss": "return loss (dB, positive)",
               "s_db": f"{first} (dB)" if len(shown) == 1 else "reflection (dB)"}[scale])
    if scale == "swr" and np.any(every > ax.get_ylim()[1]):
        ax.text(0.99, 0.97, f"SWR above {ax.get_ylim()[1]:.3g} runs off the top",
                transform=ax.transAxes, ha="right", va="top", fontsize=8, style="italic")
    _legend(ax)


def quantity_panel(ax: Any, traces: Sequence[Trace], quantity: str, segs: Group,
                   marks: list[Mark]) -> None:
    """|Sij| dB, phase or group delay of each trace, with the limits of ``segs``."""
    info = QUANTITIES[quantity]
    aperture = segs[0][1].segment.aperture if segs else 1
    factor, unit = (1e-9, "ns") if quantity == "group_delay" else (1.0, info.unit)
    curves = []
    for i, t in enumerate(traces):
        with np.errstate(all="ignore"):
            ys = finish(quantity, trace(t.sweep, t.param, quantity, aperture)) / factor
        curves.append(ys)
        shown = ys.copy()
        if quantity == "phase":  # break the line at each ±180° wrap instead of a jump
            shown[1:][np.abs(np.diff(ys)) > 180.0] = np.nan
        ax.plot(t.sweep.freq_hz, shown, color=INK, linewidth=line_width(ys.size),
                linestyle=STYLES[i % len(STYLES)], label=_quantity_name(quantity, t.name, unit))

    def convert(_quantity: str, values: np.ndarray) -> np.ndarray:
        return np.asarray(values, float) / factor

    ax.set_ylim(*value_range(np.concatenate(curves), limit_values(segs, convert)))
    draw_limits(ax, segs, convert, False, _span(traces))
    if quantity == "magnitude_db":
        for t in traces:  # |Sij| +/- U, when the capture's uncertainty is known
            draw_band(ax, t.sweep, t.param, m.db20)
        shown_params = {t.param for t in traces}
        mine = [mk for mk in marks if mk.parameter in shown_params]
        draw_marks(ax, mine, [mk.marker.db for mk in mine])
    one = traces[0].param if len({t.param for t in traces}) == 1 else "S"
    style(ax, _quantity_name(quantity, one, unit) if quantity != "magnitude_db"
          else f"|{one}| (dB)" if one != "S" else "transmission (dB)")
    _legend(ax)


def _quantity_name(quantity: str, name: str, unit: str) -> str:
    return {"magnitude_db": f"|{name}| (dB)", "phase": f"{name} phase (deg)",
            "group_delay": f"{name} group delay ({unit})"}.get(quantity,
                                                             f"{name} {quantity} ({unit})")


def impedance_panel(ax: Any, traces: Sequence[Trace], segs: Group, marks: list[Mark]) -> None:
    """R (solid) and X (dashed) of each reflection, clipped to ±Z_SPAN_MAX·Z0."""
    first = traces[0]
    z0 = first.sweep.z0[int(first.param[1]) - 1]
    zspan = Z_SPAN_MAX * z0
    ax.axhline(0.0, color=INK, linewidth=0.6)
    ax.axhline(z0, color=GRID, linewidth=1.0, linestyle="-.", label=f"Z0 = {z0:g} ohm")
    values = []
    for i, t in enumerate(traces):
        with np.errstate(all="ignore"):
            z = m.impedance(t.sweep.param(t.param), t.sweep.z0[int(t.param[1]) - 1])
        width = line_width(z.size)
        r_style, x_style = ("-", "--") if len(traces) == 1 else (STYLES[i % len(STYLES)],) * 2
        ax.plot(t.sweep.freq_hz, z.real, color=INK, linewidth=width, linestyle=r_style,
                label=f"R ({t.name})")
        ax.plot(t.sweep.freq_hz, z.imag, color="#707070" if len(traces) > 1 else INK,
                linewidth=width * 0.9, linestyle=x_style, label=f"X ({t.name})")
        values += [z.real, z.imag]
    both = np.concatenate(values)

    def convert(_quantity: str, vals: np.ndarray) -> np.ndarray:
        return np.asarray(vals, float)

    ax.set_ylim(*value_range(np.clip(both, -zspan, zspan), [*limit_values(segs, convert), 0.0]))
    draw_limits(ax, segs, convert, False, _span(traces))
    draw_mark_lines(ax, [mk for mk in marks if mk.parameter == first.param])
    if np.any(np.abs(both[np.isfinite(both)]) > zspan):
        ax.text(0.01, 0.03, f"values beyond +/-{zspan:g} ohm are off scale",
                transform=ax.transAxes, fontsize=8, style="italic")
    style(ax, "impedance (ohm)")
    _legend(ax)
