"""One page per sweep: the frequency panels on the left, the Smith chart on the right.

Left: the match (SWR, return loss or S11 dB) with every mask limit drawn, a panel for
each other masked quantity (|S21| dB, phase, group delay), and R and X against
frequency. Right: the Smith chart with the markers and their table.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from acquire.masks import Mask, MaskResult, evaluate_mask
from acquire.metrics.markers import Readout
from acquire.metrics.summary import transmits
from acquire.plotting.common import REFLECTION, PlotError, frequency_axis, no_markup
from acquire.plotting.markers import Mark, default_marks, user_marks
from acquire.plotting.panels import (
    MATCH_QUANTITIES,
    Group,
    Trace,
    impedance_panel,
    match_panel,
    quantity_panel,
)
from acquire.plotting.smith import smith_panel
from acquire.sweep import Sweep

SCALES = ("swr", "return_loss", "s_db")


def render(
    sweep: Sweep,
    *,
    masks: Sequence[Mask] = (),
    scale: str | None = None,
    title: str | None = None,
    markers: Sequence[Readout] | None = None,
) -> Any:
    """Build the page as a matplotlib ``Figure``.

    ``scale`` picks the match axis (``swr``, ``return_loss`` positive dB, or ``s_db``
    for S11 in dB, the negative plotting habit); by default the first mask's quantity,
    else SWR. Masks on SWR, return loss and |Sii| dB are all drawn on that one axis.
    ``markers`` (placed by ``metrics.markers.place_markers``) replace the automatic
    resonance and band-edge markers.
    """
    from matplotlib.figure import Figure

    if sweep.points < 2:
        raise PlotError("a plot needs at least 2 sweep points")
    check_scale(scale)
    results = [evaluate_mask(mask, sweep) for mask in masks]
    groups = panel_groups(sweep, results)
    main_scale = scale or group_scale(next(iter(groups.values())))
    marks = user_marks(list(markers)) if markers else default_marks(sweep, main_scale)

    fig = Figure(figsize=(13.0, 8.5), layout="constrained")
    rows = list(groups.items())
    heights = [1.3 if kind == "match" else 1.0 for (_, kind), _ in rows]
    grid = fig.add_gridspec(len(rows), 2, width_ratios=(1.3, 1.0), height_ratios=heights)
    axes = []
    for row, ((param, kind), segs) in enumerate(rows):
        ax = fig.add_subplot(grid[row, 0], sharex=axes[0] if axes else None)
        panel_scale = (scale or group_scale(segs)) if kind == "match" else main_scale
        draw_panel(ax, panel_traces(sweep, param), kind, panel_scale, segs, marks)
        axes.append(ax)
    for ax in axes[:-1]:
        ax.tick_params(labelbottom=False)
    frequency_axis(axes[-1], sweep.freq_hz)
    smith_panel(fig.add_subplot(grid[:, 1]),
                panel_traces(sweep, "Sii" if sweep.ports >= 2 else REFLECTION), marks)
    fig.suptitle(page_title(sweep, results, title), fontsize=12, fontweight="bold")
    no_markup(fig)
    return fig


def render_compact(sweep: Sweep, *, masks: Sequence[Mask] = (), title: str | None = None,
                   note: str | None = None) -> Any:
    """A small page: only the panels that carry a mask (always the match), no Smith
    chart; ``note`` (the worst violation in words) under the title."""
    from matplotlib.figure import Figure

    if sweep.points < 2:
        raise PlotError("a plot needs at least 2 sweep points")
    results = [evaluate_mask(mask, sweep) for mask in masks]
    groups = panel_groups(sweep, results)
    rows = [(key, segs) for i, (key, segs) in enumerate(groups.items()) if segs or i == 0]
    fig = Figure(figsize=(8.0, 1.2 + 2.6 * len(rows)), layout="constrained")
    axes = fig.subplots(len(rows), 1, sharex=True, squeeze=False)[:, 0]
    for ax, ((param, kind), segs) in zip(axes, rows, strict=True):
        draw_panel(ax, panel_traces(sweep, param), kind, group_scale(segs), segs, [])
    frequency_axis(axes[-1], sweep.freq_hz)
    head = page_title(sweep, results, title)
    import textwrap

    text = head + ("\n" + textwrap.fill(note, 78) if note else "")
    fig.suptitle(text, fontsize=10, fontweight="bold")
    no_markup(fig)
    return fig


def check_scale(scale: str | None) -> None:
    if scale is not None and scale not in SCALES:
        raise PlotError(f"unknown scale {scale!r}; use one of {', '.join(SCALES)}")


def draw_panel(ax: Any, traces: list[Trace], kind: str, scale: str, segs: Group,
               marks: list[Mark]) -> None:
    """One left-hand panel: ``kind`` is match, impedance or a quantity name."""
    if kind == "match":
        match_panel(ax, traces, scale, segs, marks)
    elif kind == "impedance":
        impedance_panel(ax, traces, segs, marks)
    else:
        quantity_panel(ax, traces, kind, segs, marks)


def panel_groups(sweep: Sweep, results: list[MaskResult]) -> dict[tuple[str, str], Group]:
    """Panels keyed (parameter, kind), in page order: match, others, impedance.

    A two-port page shows all four parameters: S11 and S22 share the match panel (key
    "Sii"), S21 and S12 the transmission panel (key "Sij"). R and X are shown for a
    one-port, a two-port that does not transmit, or where a mask judges them.
    """
    two = sweep.ports >= 2
    match: dict[tuple[str, str], Group] = {("Sii" if two else REFLECTION, "match"): []}
    other: dict[tuple[str, str], Group] = {("Sij", "magnitude_db"): []} if two else {}
    imped: dict[tuple[str, str], Group] = {}
    for res in results:
        for seg_res in res.segments:
            seg = seg_res.segment
            item = (res.mask.name, seg_res)
            reflection = seg.parameter[1] == seg.parameter[2]
            if seg.quantity in MATCH_QUANTITIES and reflection:
                match.setdefault(("Sii" if two else seg.parameter, "match"), []).append(item)
            elif seg.quantity in ("resistance", "reactance"):
                imped.setdefault((seg.parameter, "impedance"), []).append(item)
            elif two and seg.quantity == "magnitude_db" and seg.parameter in ("S21", "S12"):
                other[("Sij", "magnitude_db")].append(item)
            else:
                other.setdefault((seg.parameter, seg.quantity), []).append(item)
    main_z = imped.pop((REFLECTION, "impedance"), None)
    if main_z is not None or not transmits(sweep):
        imped[(REFLECTION, "impedance")] = main_z or []
    return {**match, **other, **imped}


def panel_traces(sweep: Sweep, key: str) -> list[Trace]:
    """The traces of a panel key: both reflections, both transmissions, or one."""
    names = {"Sii": ("S11", "S22"), "Sij": ("S21", "S12")}.get(key, (key,))
    return [Trace(sweep, name, name) for name in names]


def group_scale(segs: Group) -> str:
    for _, seg_res in segs:
        return {"swr": "swr", "return_loss": "return_loss", "magnitude_db": "s_db"}[
            seg_res.segment.quantity]
    return "swr"


def page_title(sweep: Sweep, results: list[MaskResult], title: str | None) -> str:
    parts = [title] if title else []
    serial = sweep.meta.get("serial")
    if isinstance(serial, str) and serial:
        parts.append(f"serial {serial}")
    for res in results:
        parts.append(f"mask {res.mask.name}: {res.verdict.upper()}")
    return "   |   ".join(parts) or "sweep"
