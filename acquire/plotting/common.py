"""Colours, axis helpers and text safety shared by every panel of the plot page.

Everything reads in grey: traces differ by line style, markers by shape, the forbidden
side by hatching. matplotlib is imported inside functions only (no pyplot, no global
state), so importing the package stays cheap.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from acquire.sweep import Sweep
from drivers.errors import SweepdError

INK = "black"
LIMIT = "#404040"
HATCH = "#8c8c8c"
SHADE = "#efefef"
FAIL = "#c00000"
GRID = "#c4c4c4"
REFLECTION = "S11"  # the parameter of the Smith chart, the markers and the R/X panel
# Line styles for several traces in one panel (overlays, the four two-port parameters),
# told apart in grey print by the dash pattern.
STYLES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1, 1, 1)), (0, (8, 2)))


class PlotError(SweepdError):
    """A plot cannot be made as asked (unknown format or scale, too few points)."""


def no_markup(fig: Any) -> None:
    """Turn math-text parsing off for every text of ``fig`` (our own labels use none), so
    no text a user wrote can break or change the drawing: a ``$`` or a backslash is drawn
    as typed (the figure-wide form of ``acquire.plaintext.plain_text``, which must not be
    applied on top of it)."""
    from matplotlib.text import Text

    for artist in fig.findobj(Text):
        artist.set_parse_math(False)


def style(ax: Any, ylabel: str) -> None:
    ax.grid(True, color=GRID, linewidth=0.6, linestyle=":")
    ax.set_ylabel(ylabel)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)


def frequency_axis(ax: Any, freq: np.ndarray) -> None:
    from matplotlib.ticker import FuncFormatter

    top = float(np.max(np.abs(freq)))
    factor, unit = next(((fa, u) for fa, u in ((1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz"))
                         if top >= fa), (1.0, "Hz"))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda x, _pos: f"{x / factor:g}"))
    ax.set_xlabel(f"frequency ({unit})")
    ax.set_xlim(float(freq[0]), float(freq[-1]))


def span(sweep: Sweep) -> float:
    return float(sweep.freq_hz[-1] - sweep.freq_hz[0])


def value_range(values: np.ndarray, extra: list[float], pad: float = 0.08) -> tuple[float, float]:
    """Axis limits around the finite values and ``extra`` (limit lines), padded."""
    data = np.concatenate([values[np.isfinite(values)], np.asarray(extra, float)])
    if data.size == 0:
        return -1.0, 1.0
    lo, hi = float(np.min(data)), float(np.max(data))
    width = hi - lo or max(abs(hi), 1.0)
    return lo - pad * width, hi + pad * width


def line_width(points: int) -> float:
    """Trace width: thinner as the sweep gets longer, so thousands of points stay a line."""
    return 1.6 if points <= 801 else 0.9 if points <= 4001 else 0.5
