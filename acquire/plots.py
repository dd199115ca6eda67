"""Pictures of a sweep a person reads at a glance (headless matplotlib, Agg).

One page: on the left the match (SWR, return loss or S11 dB) against frequency with
every mask limit drawn, the forbidden side hatched and failing positions marked; a
panel for each other masked quantity (|S21| dB, phase, group delay); R and X against
frequency. On the right a Smith chart drawn here (constant-resistance circles and
constant-reactance arcs) with markers at the resonance and the band edges, labelled
with frequency, R + jX and SWR.

Everything reads in grey: traces differ by line style, markers by shape, the forbidden
side by hatching. matplotlib is imported inside functions only (no pyplot, no global
state), so importing this module stays cheap.
"""

from __future__ import annotations

import io
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from acquire import metrics as m
from acquire.masks import Mask, MaskResult, SegmentResult, evaluate_mask
from acquire.metrics.quantities import QUANTITIES, finish, trace
from acquire.plaintext import plain_text
from acquire.storage import replace_atomic
from acquire.sweep import Sweep
from acquire.units import format_frequency
from drivers.errors import SweepdError

SCALES = ("swr", "return_loss", "s_db")
FORMATS = (".png", ".svg")
REFLECTION = "S11"  # the parameter of the Smith chart, the markers and the R/X panel
MATCH_QUANTITIES = ("swr", "return_loss", "magnitude_db")
MAX_CROSSES = 20
SWR_TOP_MAX = 10.0  # the SWR axis stops here; higher values leave the top of the panel
Z_SPAN_MAX = 10.0  # R/X axis limited to ±10·Z0 so a near-open does not flatten the rest

INK = "black"
LIMIT = "#404040"
HATCH = "#8c8c8c"
SHADE = "#efefef"
FAIL = "#c00000"
GRID = "#c4c4c4"

_SMITH_R = (0.2, 0.5, 1.0, 2.0, 5.0)
_SMITH_X = (0.2, 0.5, 1.0, 2.0, 5.0)

Group = list[tuple[str, SegmentResult]]  # (mask name, segment result)


class PlotError(SweepdError):
    """A plot cannot be made as asked (unknown format or scale, too few points)."""


@dataclass(frozen=True)
class _Mark:
    """A marker shown on the frequency panels and on the Smith chart."""

    key: str  # short tag drawn beside the point
    title: str
    marker: m.Marker
    shape: str


def plot_file(
    sweep: Sweep,
    path: Path | str,
    *,
    masks: Sequence[Mask] = (),
    scale: str | None = None,
    title: str | None = None,
) -> Path:
    """Render the page and write it atomically to ``path`` (.png or .svg)."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in FORMATS:
        raise PlotError(f"plot output {path}: the name must end in .png or .svg")
    fig = render(sweep, masks=masks, scale=scale, title=title)
    buffer = io.BytesIO()
    fig.savefig(buffer, format=suffix[1:], dpi=110)
    return replace_atomic(path, buffer.getvalue())


def render(
    sweep: Sweep,
    *,
    masks: Sequence[Mask] = (),
    scale: str | None = None,
    title: str | None = None,
) -> Any:
    """Build the page as a matplotlib ``Figure``.

    ``scale`` picks the match axis (``swr``, ``return_loss`` positive dB, or ``s_db``
    for S11 in dB, the negative plotting habit); by default the first mask's quantity,
    else SWR. Masks on SWR, return loss and |Sii| dB are all drawn on that one axis.
    """
    from matplotlib.figure import Figure

    if sweep.points < 2:
        raise PlotError("a plot needs at least 2 sweep points")
    if scale is not None and scale not in SCALES:
        raise PlotError(f"unknown scale {scale!r}; use one of {', '.join(SCALES)}")
    results = [evaluate_mask(mask, sweep) for mask in masks]
    groups = _groups(sweep, results)
    main_scale = scale or _group_scale(groups[(REFLECTION, "match")])
    marks = _marks(sweep, main_scale)

    fig = Figure(figsize=(13.0, 8.5), layout="constrained")
    rows = list(groups.items())
    heights = [1.3 if kind == "match" else 1.0 for (_, kind), _ in rows]
    grid = fig.add_gridspec(len(rows), 2, width_ratios=(1.3, 1.0), height_ratios=heights)
    axes = []
    for row, ((param, kind), segs) in enumerate(rows):
        ax = fig.add_subplot(grid[row, 0], sharex=axes[0] if axes else None)
        if kind == "match":
            _match_panel(ax, sweep, param, scale or _group_scale(segs), segs,
                         marks if param == REFLECTION else [])
        elif kind == "impedance":
            _impedance_panel(ax, sweep, param, segs, marks if param == REFLECTION else [])
        else:
            _quantity_panel(ax, sweep, param, kind, segs)
        axes.append(ax)
    for ax in axes[:-1]:
        ax.tick_params(labelbottom=False)
    _frequency_axis(axes[-1], sweep.freq_hz)
    _smith_panel(fig.add_subplot(grid[:, 1]), sweep, marks)
    fig.suptitle(plain_text(_title(sweep, results, title)), fontsize=12, fontweight="bold")
    return fig


# -- panels and their order ----------------------------------------------------------


def _groups(sweep: Sweep, results: list[MaskResult]) -> dict[tuple[str, str], Group]:
    """Panels keyed (parameter, kind), in page order: match, others, impedance."""
    match: dict[tuple[str, str], Group] = {(REFLECTION, "match"): []}
    other: dict[tuple[str, str], Group] = {}
    imped: dict[tuple[str, str], Group] = {}
    for res in results:
        for seg_res in res.segments:
            seg = seg_res.segment
            if seg.quantity in MATCH_QUANTITIES and seg.parameter[1] == seg.parameter[2]:
                match.setdefault((seg.parameter, "match"), []).append((res.mask.name, seg_res))
            elif seg.quantity in ("resistance", "reactance"):
                imped.setdefault((seg.parameter, "impedance"), []).append((res.mask.name, seg_res))
            else:
                key = (seg.parameter, seg.quantity)
                other.setdefault(key, []).append((res.mask.name, seg_res))
    if sweep.ports >= 2 and not any(p == "S21" for p, _ in other):
        other[("S21", "magnitude_db")] = []
    main_z = imped.pop((REFLECTION, "impedance"), [])
    return {**match, **other, **imped, (REFLECTION, "impedance"): main_z}


def _group_scale(segs: Group) -> str:
    for _, seg_res in segs:
        return {"swr": "swr", "return_loss": "return_loss", "magnitude_db": "s_db"}[
            seg_res.segment.quantity]
    return "swr"


def _marks(sweep: Sweep, scale: str) -> list[_Mark]:
    """Resonance and band edges of S11; the band follows the axis: SWR 2 or RL 10 dB."""
    f, g = sweep.freq_hz, sweep.param(REFLECTION)
    z0 = sweep.z0[0]
    if not np.all(np.isfinite(g)):
        return []
    res = m.resonance_min_gamma(f, g)
    if scale == "swr":
        bw, name = m.bandwidth(f, g, swr_max=2.0, around_hz=res.freq_hz), "SWR 2"
    else:
        bw, name = m.bandwidth(f, g, return_loss_min_db=10.0, around_hz=res.freq_hz), "RL 10 dB"
    # Called a resonance only when it is a dip: inside the sweep and crossing the band
    # threshold on at least one side (a flat, matched trace has a minimum, not a dip).
    dip = not res.at_edge and bw.band is not None and not (bw.band.lo_open and bw.band.hi_open)
    marks = [_Mark("R" if dip else "M", "resonance" if dip else "minimum |S11|",
                   m.marker(f, g, res.freq_hz, z0), "o")]
    if bw.band is not None:
        if not bw.band.lo_open:
            marks.append(_Mark("L", f"{name} low edge", m.marker(f, g, bw.band.lo_hz, z0), "<"))
        if not bw.band.hi_open:
            marks.append(_Mark("H", f"{name} high edge", m.marker(f, g, bw.band.hi_hz, z0), ">"))
    return marks


# -- value conversions for the match axis --------------------------------------------


def _to_gamma(quantity: str, values: np.ndarray) -> np.ndarray:
    v = np.asarray(values, dtype=np.float64)
    if quantity == "swr":
        return (v - 1.0) / (v + 1.0)
    if quantity == "return_loss":
        return 10.0 ** (-v / 20.0)
    return 10.0 ** (v / 20.0)  # magnitude_db


def _display(scale: str, gamma_abs: np.ndarray) -> np.ndarray:
    if scale == "swr":
        return m.swr(gamma_abs)
    if scale == "return_loss":
        return m.return_loss_db(gamma_abs)
    return m.db20(gamma_abs)


def _rises_with_gamma(name: str) -> bool:
    return name != "return_loss"


# -- drawing helpers -----------------------------------------------------------------


def _style(ax: Any, ylabel: str) -> None:
    ax.grid(True, color=GRID, linewidth=0.6, linestyle=":")
    ax.set_ylabel(ylabel)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)


def _frequency_axis(ax: Any, freq: np.ndarray) -> None:
    from matplotlib.ticker import FuncFormatter

    top = float(np.max(np.abs(freq)))
    factor, unit = next(((fa, u) for fa, u in ((1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz"))
                         if top >= fa), (1.0, "Hz"))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda x, _pos: f"{x / factor:g}"))
    ax.set_xlabel(f"frequency ({unit})")
    ax.set_xlim(float(freq[0]), float(freq[-1]))


def _draw_limits(ax: Any, segs: Group, convert, flip: bool, span_hz: float) -> None:
    """Limit lines (dashed), forbidden side hatched, failing positions as crosses."""
    seen_masks: set[str] = set()
    low, high = ax.get_ylim()
    for mask_name, seg_res in segs:
        seg = seg_res.segment
        if seg_res.verdict == "skipped":
            continue
        fs = np.linspace(seg.from_hz, seg.to_hz, 64)
        for bound, limit in (("upper", seg.upper), ("lower", seg.lower)):
            if limit is None:
                continue
            line = convert(seg.quantity, limit.at(fs, seg.from_hz, seg.to_hz))
            upper_side = (bound == "upper") != flip
            label = None if mask_name in seen_masks else plain_text(f"limit: {mask_name}")
            seen_masks.add(mask_name)
            ax.plot(fs, line, color=LIMIT, linestyle="--", linewidth=2.0, label=label, zorder=3)
            edge = high if upper_side else low
            ax.fill_between(fs, line, edge, facecolor=SHADE, edgecolor=HATCH, hatch="///",
                            linewidth=0.0, zorder=1)
        bad = np.flatnonzero(seg_res.failing)
        if bad.size:
            known = "fails the mask" in ax.get_legend_handles_labels()[1]
            # At most MAX_CROSSES crosses per segment (always the worst one), so a long
            # failing stretch does not bury the trace; the strip below shows every range.
            pick = bad[:: max(1, bad.size // MAX_CROSSES)]
            pick = np.union1d(pick, [int(np.argmin(seg_res.margins))])
            ys = convert(seg.quantity, seg_res.values[pick])
            # Failing values off the axis are pinned to its edge so they stay visible.
            ax.plot(seg_res.freq_hz[pick], np.clip(ys, low, high), linestyle="none",
                    marker="X", markersize=9, markerfacecolor=FAIL, markeredgecolor=INK,
                    markeredgewidth=0.8, zorder=5, clip_on=False,
                    label=None if known else "fails the mask")
            _fail_strip(ax, seg_res, 0.004 * span_hz)
    ax.set_ylim(low, high)
    _verdict_note(ax, segs)


def _fail_strip(ax: Any, seg_res: SegmentResult, min_width: float) -> None:
    """A dark hatched bar along the bottom of the panel over every failing range."""
    for lo, hi in seg_res.failing_ranges():
        if hi - lo < min_width:
            mid = 0.5 * (lo + hi)
            lo, hi = mid - min_width / 2, mid + min_width / 2
        ax.axvspan(lo, hi, ymin=0.0, ymax=0.035, facecolor=FAIL, edgecolor=INK,
                   hatch="xxx", linewidth=0.6, zorder=6)


def _verdict_note(ax: Any, segs: Group) -> None:
    """Panel title: one line per judged segment with verdict, worst value and margin."""
    from acquire.metrics.quantities import format_value

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
        ax.set_title(plain_text("\n".join(lines)), loc="left", fontsize=8.5, family="monospace")


def _span(sweep: Sweep) -> float:
    return float(sweep.freq_hz[-1] - sweep.freq_hz[0])


def _limit_values(segs: Group, convert) -> list[float]:
    vals: list[float] = []
    for _, seg_res in segs:
        seg = seg_res.segment
        for limit in (seg.upper, seg.lower):
            if limit is not None:
                vals += list(convert(seg.quantity, np.array([limit.start, limit.stop])))
    return vals


def _range(values: np.ndarray, extra: list[float], pad: float = 0.08) -> tuple[float, float]:
    data = np.concatenate([values[np.isfinite(values)], np.asarray(extra, float)])
    lo, hi = float(np.min(data)), float(np.max(data))
    span = hi - lo or max(abs(hi), 1.0)
    return lo - pad * span, hi + pad * span


def _draw_marks(ax: Any, marks: list[_Mark], ys: list[float]) -> None:
    for mark, y in zip(marks, ys, strict=True):
        ax.plot([mark.marker.freq_hz], [y], linestyle="none", marker=mark.shape, markersize=8,
                markerfacecolor="white", markeredgecolor=INK, markeredgewidth=1.4, zorder=6)
        ax.annotate(mark.key, (mark.marker.freq_hz, y), xytext=(0, 9),
                    textcoords="offset points", ha="center", fontsize=9, fontweight="bold")


def _match_panel(ax: Any, sweep: Sweep, param: str, scale: str, segs: Group,
                 marks: list[_Mark]) -> None:
    f = sweep.freq_hz
    mag = np.abs(sweep.param(param))

    def convert(quantity: str, values: np.ndarray) -> np.ndarray:
        return _display(scale, _to_gamma(quantity, values))

    ys = _display(scale, mag)
    extra = _limit_values(segs, convert)
    if scale == "swr":
        finite = ys[np.isfinite(ys)]
        top = min(max([float(np.max(finite)) if finite.size else 2.0, *extra]) * 1.08,
                  max([SWR_TOP_MAX, *extra]))
        ax.set_ylim(1.0, max(top, 1.2))
    elif scale == "return_loss":
        ax.set_ylim(*_range(ys, [*extra, 0.0]))  # keep RL 0 dB (total reflection) in view
    else:
        ax.set_ylim(*_range(ys, extra))
    label = {"swr": f"{param} SWR", "return_loss": f"{param} return loss",
             "s_db": f"{param} (dB)"}[scale]
    ax.plot(f, ys, color=INK, linewidth=1.6, label=label, zorder=4)
    flip_for = {q: _rises_with_gamma(q) != _rises_with_gamma(scale) for q in MATCH_QUANTITIES}
    # Limits of any match quantity share the axis; the bound flips with the direction.
    by_flip: dict[bool, Group] = {}
    for item in segs:
        by_flip.setdefault(flip_for[item[1].segment.quantity], []).append(item)
    for flip, items in by_flip.items():
        _draw_limits(ax, items, convert, flip, _span(sweep))
    _draw_marks(ax, marks, [float(_display(scale, abs(mk.marker.value))) for mk in marks])
    _style(ax, {"swr": "SWR", "return_loss": "return loss (dB, positive)",
                "s_db": f"{param} (dB)"}[scale])
    if scale == "swr" and np.any(ys > ax.get_ylim()[1]):
        ax.text(0.99, 0.97, f"SWR above {ax.get_ylim()[1]:.3g} runs off the top",
                transform=ax.transAxes, ha="right", va="top", fontsize=8, style="italic")
    ax.legend(loc="best", fontsize=8, framealpha=0.9)


def _quantity_panel(ax: Any, sweep: Sweep, param: str, quantity: str, segs: Group) -> None:
    info = QUANTITIES[quantity]
    aperture = segs[0][1].segment.aperture if segs else 1
    factor, unit = (1e-9, "ns") if quantity == "group_delay" else (1.0, info.unit)
    with np.errstate(all="ignore"):
        ys = finish(quantity, trace(sweep, param, quantity, aperture)) / factor
    shown = ys.copy()
    if quantity == "phase":  # break the line at each ±180° wrap instead of a vertical jump
        shown[1:][np.abs(np.diff(ys)) > 180.0] = np.nan

    def convert(_quantity: str, values: np.ndarray) -> np.ndarray:
        return np.asarray(values, float) / factor

    ax.set_ylim(*_range(ys, _limit_values(segs, convert)))
    names = {"magnitude_db": f"|{param}| (dB)", "phase": f"{param} phase (deg)",
             "group_delay": f"{param} group delay ({unit})"}
    ax.plot(sweep.freq_hz, shown, color=INK, linewidth=1.6, label=names.get(quantity, param))
    _draw_limits(ax, segs, convert, False, _span(sweep))
    _style(ax, names.get(quantity, f"{param} {quantity} ({unit})"))
    ax.legend(loc="best", fontsize=8, framealpha=0.9)


def _impedance_panel(ax: Any, sweep: Sweep, param: str, segs: Group, marks: list[_Mark]) -> None:
    port = int(param[1]) - 1
    z0 = sweep.z0[port]
    with np.errstate(all="ignore"):
        z = m.impedance(sweep.param(param), z0)
    f = sweep.freq_hz
    span = Z_SPAN_MAX * z0
    ax.axhline(0.0, color=INK, linewidth=0.6)
    ax.axhline(z0, color=GRID, linewidth=1.0, linestyle="-.", label=f"Z0 = {z0:g} ohm")
    ax.plot(f, z.real, color=INK, linewidth=1.6, label=f"R ({param})")
    ax.plot(f, z.imag, color=INK, linewidth=1.4, linestyle="--", label=f"X ({param})")

    def convert(_quantity: str, values: np.ndarray) -> np.ndarray:
        return np.asarray(values, float)

    both = np.concatenate([z.real, z.imag])
    lo, hi = _range(np.clip(both, -span, span), [*_limit_values(segs, convert), 0.0])
    ax.set_ylim(lo, hi)
    _draw_limits(ax, segs, convert, False, _span(sweep))
    for mark in marks:
        ax.axvline(mark.marker.freq_hz, color=INK, linewidth=0.8, linestyle=":")
        ax.annotate(mark.key, (mark.marker.freq_hz, 1.0), xycoords=("data", "axes fraction"),
                    xytext=(3, -10), textcoords="offset points", fontsize=9, fontweight="bold")
    if np.any(np.abs(both[np.isfinite(both)]) > span):
        ax.text(0.01, 0.03, f"values beyond +/-{span:g} ohm are off scale",
                transform=ax.transAxes, fontsize=8, style="italic")
    _style(ax, "impedance (ohm)")
    ax.legend(loc="best", fontsize=8, framealpha=0.9)


# -- Smith chart ---------------------------------------------------------------------


def _smith_grid(ax: Any) -> None:
    """Constant-r circles and constant-x arcs, mapped from the z plane (Γ = (z−1)/(z+1))."""
    t = np.tan(np.linspace(-np.pi / 2 + 1e-3, np.pi / 2 - 1e-3, 721))
    pos = np.tan(np.linspace(0.0, np.pi / 2 - 1e-3, 721))
    kw = {"color": GRID, "linewidth": 0.8, "zorder": 1}
    circle = np.exp(1j * np.linspace(0, 2 * np.pi, 721))
    ax.plot(circle.real, circle.imag, color=INK, linewidth=1.2, zorder=2)
    ax.plot([-1, 1], [0, 0], **kw)
    for r in _SMITH_R:
        g = m.reflection(r + 1j * t, 1.0)
        ax.plot(g.real, g.imag, **kw)
        gx = float(m.reflection(r, 1.0).real)
        ax.text(gx, 0.015, f"{r:g}", fontsize=7, color="#606060", ha="right", va="bottom",
                rotation=90)
    for x in _SMITH_X:
        for sign in (1, -1):
            g = m.reflection(pos + 1j * sign * x, 1.0)
            ax.plot(g.real, g.imag, **kw)
            edge = complex(m.reflection(1j * sign * x, 1.0))
            ax.text(1.07 * edge.real, 1.07 * edge.imag, f"{'+' if sign > 0 else '-'}{x:g}j",
                    fontsize=7, color="#606060", ha="center", va="center")
    ax.text(-1.07, 0.0, "0", fontsize=7, color="#606060", ha="right", va="center")


def _smith_panel(ax: Any, sweep: Sweep, marks: list[_Mark]) -> None:
    g = sweep.param(REFLECTION)
    f = sweep.freq_hz
    _smith_grid(ax)
    ok = np.isfinite(g)
    ax.plot(g.real[ok], g.imag[ok], color=INK, linewidth=1.6, zorder=4)
    ends = [(0, "s", f"start {format_frequency(f[0])}"),
            (-1, "D", f"stop {format_frequency(f[-1])}")]
    for k, shape, label in ends:
        if ok[k]:
            ax.plot([g[k].real], [g[k].imag], linestyle="none", marker=shape, markersize=6,
                    markerfacecolor=INK, markeredgecolor=INK, zorder=5, label=label)
    for mark in marks:
        v = mark.marker.value
        ax.plot([v.real], [v.imag], linestyle="none", marker=mark.shape, markersize=9,
                markerfacecolor="white", markeredgecolor=INK, markeredgewidth=1.4, zorder=6)
        ax.annotate(mark.key, (v.real, v.imag), xytext=(7, 7), textcoords="offset points",
                    fontsize=10, fontweight="bold", zorder=7)
    ax.set_aspect("equal")
    ax.set_xlim(-1.2, 1.2)
    ax.set_ylim(-1.2 - 0.11 * (len(marks) + 1), 1.2)
    ax.axis("off")
    ax.set_title(f"{REFLECTION} Smith chart (normalised to {sweep.z0[0]:g} ohm)", fontsize=10)
    if marks:
        rows = [f"{mk.key} {mk.title:<20s} {mk.marker.label()}" for mk in marks]
        ax.text(-1.2, -1.22, "\n".join(rows), family="monospace", fontsize=8, va="top")
    ax.legend(loc="upper left", fontsize=8, frameon=False, bbox_to_anchor=(0.0, 1.0))


def _title(sweep: Sweep, results: list[MaskResult], title: str | None) -> str:
    parts = [title] if title else []
    serial = sweep.meta.get("serial")
    if isinstance(serial, str) and serial:
        parts.append(f"serial {serial}")
    for res in results:
        parts.append(f"mask {res.mask.name}: {res.verdict.upper()}")
    return "   |   ".join(parts) or "sweep"
