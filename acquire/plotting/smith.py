"""The Smith chart, drawn here: constant-resistance circles and constant-reactance arcs
mapped from the z plane (Γ = (z − 1)/(z + 1)), the traces as thin lines (no symbol per
point, so thousands of points stay a line), start and stop symbols, the markers and a
table of their values under the chart.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from acquire import metrics as m
from acquire.plotting.common import GRID, INK, STYLES, line_width
from acquire.plotting.markers import Mark
from acquire.plotting.panels import Trace
from acquire.units import format_frequency

_SMITH_R = (0.2, 0.5, 1.0, 2.0, 5.0)
_SMITH_X = (0.2, 0.5, 1.0, 2.0, 5.0)


def smith_grid(ax: Any) -> None:
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


def smith_panel(ax: Any, traces: Sequence[Trace], marks: list[Mark]) -> None:
    """Every trace (a reflection) on one chart, with start/stop symbols and the marks."""
    smith_grid(ax)
    several = len(traces) > 1
    for i, t in enumerate(traces):
        g, f = t.sweep.param(t.param), t.sweep.freq_hz
        ok = np.isfinite(g)
        ax.plot(g.real[ok], g.imag[ok], color=INK, linewidth=line_width(g.size),
                linestyle=STYLES[i % len(STYLES)], solid_joinstyle="round", zorder=4,
                label=t.name if several else None)
        ends = [(0, "s", f"start {format_frequency(f[0])}"),
                (-1, "D", f"stop {format_frequency(f[-1])}")]
        for k, shape, label in ends:
            if ok[k]:
                ax.plot([g[k].real], [g[k].imag], linestyle="none", marker=shape, markersize=6,
                        markerfacecolor=INK, markeredgecolor=INK, zorder=5,
                        label=label if i == len(traces) - 1 else None)
    shown = {t.param for t in traces}
    mine = [mk for mk in marks if mk.parameter in shown]
    for mark in mine:
        v = mark.marker.value
        ax.plot([v.real], [v.imag], linestyle="none", marker=mark.shape, markersize=9,
                markerfacecolor="white", markeredgecolor=INK, markeredgewidth=1.4, zorder=6)
        ax.annotate(mark.key, (v.real, v.imag), xytext=(7, 7), textcoords="offset points",
                    fontsize=10, fontweight="bold", zorder=7)
    rows = [row for mk in marks for row in mk.table_rows()]
    ax.set_aspect("equal")
    ax.set_xlim(-1.2, 1.2)
    ax.set_ylim(-1.2 - 0.11 * (len(rows) + 1), 1.2)
    ax.axis("off")
    names = " and ".join(sorted(shown))
    z0 = traces[0].sweep.z0[int(traces[0].param[1]) - 1]
    ax.set_title(f"{names} Smith chart (normalised to {z0:g} ohm)", fontsize=10)
    if rows:
        ax.text(-1.2, -1.22, "\n".join(rows), family="monospace", fontsize=8, va="top")
    ax.legend(loc="upper left", fontsize=8, frameon=False, bbox_to_anchor=(0.0, 1.0))
