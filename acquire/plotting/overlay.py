"""Several files on one page: a golden unit and a DUT, a morning and an evening sweep.

Every file's trace of one parameter in one quantity, with the masks drawn once and each
file's verdict in the legend; optionally the difference of each file from the first,
on the first file's frequency grid; a Smith chart of all of them for a reflection.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from acquire.masks import Mask, evaluate_mask
from acquire.metrics.quantities import finish, trace
from acquire.plotting.common import INK, STYLES, PlotError, frequency_axis, line_width, no_markup
from acquire.plotting.common import style as style_axis
from acquire.plotting.page import check_scale, draw_panel, group_scale
from acquire.plotting.panels import MATCH_QUANTITIES, Group, Trace, display
from acquire.plotting.smith import smith_panel
from acquire.sweep import Sweep

# Quantities an overlay can show, as named on the command line.
OVERLAY_QUANTITIES = ("swr", "return_loss", "s_db", "phase", "group_delay", "impedance")
_UNITS = {"swr": "", "return_loss": "dB", "s_db": "dB", "magnitude_db": "dB",
          "phase": "deg", "group_delay": "ns"}


@dataclass(frozen=True)
class Source:
    """One file of the overlay: its sweep and the name shown in legends."""

    name: str
    sweep: Sweep


def panel_kind(param: str, quantity: str | None, masks: Sequence[Mask]) -> tuple[str, str]:
    """(panel kind, match scale) for ``param`` in ``quantity``; errors say what fits."""
    reflection = param[1] == param[2]
    if quantity is None:
        quantity = _mask_scale(param, masks) if reflection else "s_db"
    if quantity not in OVERLAY_QUANTITIES:
        raise PlotError(f"unknown quantity {quantity!r}; use one of "
                        f"{', '.join(OVERLAY_QUANTITIES)}")
    if quantity in ("swr", "return_loss", "s_db"):
        if reflection:
            return "match", quantity
        if quantity != "s_db":
            raise PlotError(f"{quantity} is for a reflection (S11, S22), not {param}")
        return "magnitude_db", "s_db"
    if quantity == "impedance" and not reflection:
        raise PlotError(f"impedance is for a reflection (S11, S22), not {param}")
    return quantity, "swr"


def _mask_scale(param: str, masks: Sequence[Mask]) -> str:
    for mask in masks:
        for seg in mask.segments:
            if seg.parameter == param and seg.quantity in MATCH_QUANTITIES:
                return {"swr": "swr", "return_loss": "return_loss",
                        "magnitude_db": "s_db"}[seg.quantity]
    return "swr"


def render_overlay(sources: Sequence[Source], *, param: str = "S11",
                   quantity: str | None = None, masks: Sequence[Mask] = (),
                   difference: bool = False, title: str | None = None) -> Any:
    """Build the overlay page as a matplotlib ``Figure``."""
    from matplotlib.figure import Figure

    kind, scale = panel_kind(param, quantity, masks)
    _check_sources(sources, param, difference)
    check_scale(scale)
    segs, verdicts = _mask_segments(sources, masks, param, kind)
    traces = [Trace(src.sweep, param, _label(src.name, verdicts[i]))
              for i, src in enumerate(sources)]
    smith = param[1] == param[2]
    fig = Figure(figsize=(13.0 if smith else 10.0, 8.5), layout="constrained")
    rows = 2 if difference else 1
    grid = fig.add_gridspec(rows, 2 if smith else 1, width_ratios=(1.3, 1.0) if smith else None,
                            height_ratios=(1.4, 1.0) if difference else None)
    ax = fig.add_subplot(grid[0, 0])
    draw_panel(ax, traces, kind, scale if kind == "match" else group_scale(segs), segs, [])
    ax.set_title("", loc="left")  # the verdicts are in the legend, one per file
    axes = [ax]
    if difference:
        low = fig.add_subplot(grid[1, 0], sharex=ax)
        difference_panel(low, sources, param, kind, scale)
        axes.append(low)
    for upper in axes[:-1]:
        upper.tick_params(labelbottom=False)
    frequency_axis(axes[-1], sources[0].sweep.freq_hz)
    if smith:
        smith_panel(fig.add_subplot(grid[:, 1]), traces, [])
    names = ", ".join(src.name for src in sources)
    fig.suptitle(title or f"{param}: {names}", fontsize=12, fontweight="bold")
    no_markup(fig)
    return fig


def _check_sources(sources: Sequence[Source], param: str, difference: bool) -> None:
    if not sources:
        raise PlotError("an overlay needs at least one file")
    for src in sources:
        if src.sweep.points < 2:
            raise PlotError(f"{src.name}: a plot needs at least 2 sweep points")
        try:
            src.sweep.param(param)
        except ValueError as exc:
            raise PlotError(f"{src.name}: {exc}") from None
    if difference and len(sources) < 2:
        raise PlotError("a difference needs at least two files (the first is the reference)")


def _label(name: str, verdict: str | None) -> str:
    return f"{name}: {verdict.upper()}" if verdict else name


def _mask_segments(sources: Sequence[Source], masks: Sequence[Mask], param: str,
                   kind: str) -> tuple[Group, list[str | None]]:
    """Every file's segments on this panel, and each file's overall mask verdict."""
    segs: Group = []
    verdicts: list[str | None] = []
    for src in sources:
        results = [evaluate_mask(mask, src.sweep) for mask in masks]
        verdict = None
        if results:
            verdict = "fail" if any(r.verdict == "fail" for r in results) else "pass"
        verdicts.append(verdict)
        for res in results:
            segs += [(res.mask.name, s) for s in res.segments if _fits(s.segment, param, kind)]
    return segs, verdicts


def _fits(seg: Any, param: str, kind: str) -> bool:
    if seg.parameter != param:
        return False
    if kind == "match":
        return seg.quantity in MATCH_QUANTITIES
    if kind == "impedance":
        return seg.quantity in ("resistance", "reactance")
    return seg.quantity == kind


def values_of(sweep: Sweep, param: str, kind: str, scale: str) -> np.ndarray:
    """The panel's quantity of ``param`` on the sweep's grid (phase wrapped)."""
    with np.errstate(all="ignore"):
        if kind == "match":
            return display(scale, np.abs(sweep.param(param)))
        if kind == "impedance":
            from acquire.metrics import impedance

            return impedance(sweep.param(param), sweep.z0[int(param[1]) - 1]).real
        values = finish(kind, trace(sweep, param, kind))
    return values * 1e9 if kind == "group_delay" else values


def difference_panel(ax: Any, sources: Sequence[Source], param: str, kind: str,
                     scale: str) -> None:
    """Each later file minus the first, on the first file's grid where both have data."""
    ref = sources[0]
    f = ref.sweep.freq_hz
    base = values_of(ref.sweep, param, kind, scale)
    ax.axhline(0.0, color=INK, linewidth=0.6)
    for i, src in enumerate(sources[1:], start=1):
        g = src.sweep.freq_hz
        inside = (f >= g[0]) & (f <= g[-1])
        if not inside.any():
            raise PlotError(f"{src.name} and {ref.name} share no frequencies; no difference")
        other = values_of(src.sweep, param, kind, scale)
        delta = np.full(f.size, np.nan)
        delta[inside] = np.interp(f[inside], g, other) - base[inside]
        if kind == "phase":
            delta = (delta + 180.0) % 360.0 - 180.0
        ax.plot(f, delta, color=INK, linewidth=line_width(f.size),
                linestyle=STYLES[i % len(STYLES)], label=f"{src.name} - {ref.name}")
    name = {"match": {"swr": "SWR", "return_loss": "return loss", "s_db": "dB"}[scale],
            "impedance": "R"}.get(kind, kind.replace("_", " "))
    unit = "ohm" if kind == "impedance" else _UNITS.get(scale if kind == "match" else kind, "")
    style_axis(ax, f"difference in {name}" + (f" ({unit})" if unit else ""))
    ax.legend(loc="best", fontsize=8, framealpha=0.9)
