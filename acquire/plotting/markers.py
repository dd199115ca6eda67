"""Markers on the page: the automatic ones (resonance, band edges) and those asked for.

Automatic markers: the resonance (or the minimum of a flat trace) and the band edges of
S11, where the band follows the match axis (SWR 2, or RL 10 dB). Markers asked for with
``--marker`` replace them; each is drawn on the panels of its own parameter and, for a
reflection, on the Smith chart, and the table under the chart gives its value in every
quantity.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from acquire import metrics as m
from acquire.metrics.markers import Readout
from acquire.plotting.common import INK, REFLECTION
from acquire.sweep import Sweep

_USER_SHAPES = ("v", "^", "o", "s", "D", "p", "h", "*")


@dataclass(frozen=True)
class Mark:
    """A marker shown on the frequency panels and on the Smith chart."""

    key: str  # short tag drawn beside the point
    title: str
    marker: m.Marker
    shape: str
    parameter: str = REFLECTION
    readout: Readout | None = None  # set for markers asked for by a person

    def table_rows(self) -> list[str]:
        """Rows for the table under the Smith chart."""
        if self.readout is None:
            return [f"{self.key} {self.title:<20s} {self.marker.label()}"]
        return [self.readout.head(), "    " + self.readout.values_text()]

def default_marks(sweep: Sweep, scale: str) -> list[Mark]:
    """Resonance and band edges of S11; the band follows the axis: SWR 2 or RL 10 dB.
    A two-port that passes signal (a thru, a cable) has no resonance: its worst match."""
    from acquire.metrics.summary import transmits

    f, g = sweep.freq_hz, sweep.param(REFLECTION)
    z0 = sweep.z0[0]
    if not np.all(np.isfinite(g)):
        return []
    if transmits(sweep):
        k = int(np.argmax(np.abs(g)))
        return [Mark("W", "worst match |S11|", m.marker(f, g, float(f[k]), z0), "o")]
    res = m.resonance_min_gamma(f, g)
    if scale == "swr":
        bw, name = m.bandwidth(f, g, swr_max=2.0, around_hz=res.freq_hz), "SWR 2"
    else:
        bw, name = m.bandwidth(f, g, return_loss_min_db=10.0, around_hz=res.freq_hz), "RL 10 dB"
    # Called a resonance only when it is a dip: inside the sweep and crossing the band
    # threshold on at least one side (a flat, matched trace has a minimum, not a dip).
    dip = not res.at_edge and bw.band is not None and not (bw.band.lo_open and bw.band.hi_open)
    marks = [Mark("R" if dip else "M", "resonance" if dip else "minimum |S11|",
                  m.marker(f, g, res.freq_hz, z0), "o")]
    if bw.band is not None:
        if not bw.band.lo_open:
            marks.append(Mark("L", f"{name} low edge", m.marker(f, g, bw.band.lo_hz, z0), "<"))
        if not bw.band.hi_open:
            marks.append(Mark("H", f"{name} high edge", m.marker(f, g, bw.band.hi_hz, z0), ">"))
    return marks


def user_marks(readouts: list[Readout]) -> list[Mark]:
    """Marks for markers placed by ``metrics.markers.place_markers``."""
    return [Mark(r.key, r.what, r.marker, _USER_SHAPES[i % len(_USER_SHAPES)], r.parameter, r)
            for i, r in enumerate(readouts)]


def draw_marks(ax: Any, marks: list[Mark], ys: list[float]) -> None:
    """Each mark as an open symbol at (frequency, y) with its key above it."""
    for mark, y in zip(marks, ys, strict=True):
        ax.plot([mark.marker.freq_hz], [y], linestyle="none", marker=mark.shape, markersize=8,
                markerfacecolor="white", markeredgecolor=INK, markeredgewidth=1.4, zorder=6)
        ax.annotate(mark.key, (mark.marker.freq_hz, y), xytext=(0, 9),
                    textcoords="offset points", ha="center", fontsize=9, fontweight="bold")


def draw_mark_lines(ax: Any, marks: list[Mark]) -> None:
    """Each mark as a dotted vertical line with its key at the top (panels in ohm)."""
    for mark in marks:
        ax.axvline(mark.marker.freq_hz, color=INK, linewidth=0.8, linestyle=":")
        ax.annotate(mark.key, (mark.marker.freq_hz, 1.0), xycoords=("data", "axes fraction"),
                    xytext=(3, -10), textcoords="offset points", fontsize=9, fontweight="bold")
