"""Pictures of sweeps a person reads at a glance (headless matplotlib, Agg).

Modules: ``page`` (one sweep: panels and Smith chart), ``panels`` (the frequency
panels), ``smith`` (the chart), ``markers`` (automatic and asked-for markers),
``overlay`` (several files on one page, difference traces), ``export`` (PNG/SVG
files), ``common`` (colours, axes, text safety). matplotlib is imported inside
functions only, so importing the package stays cheap.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from acquire.masks import Mask
from acquire.metrics.markers import Readout
from acquire.plotting.common import PlotError
from acquire.plotting.export import FORMATS, check_output, figure_bytes, save_figure
from acquire.plotting.page import SCALES, render
from acquire.sweep import Sweep

__all__ = ["FORMATS", "SCALES", "PlotError", "check_output", "figure_bytes", "plot_file",
           "render", "save_figure"]


def plot_file(
    sweep: Sweep,
    path: Path | str,
    *,
    masks: Sequence[Mask] = (),
    scale: str | None = None,
    title: str | None = None,
    markers: Sequence[Readout] | None = None,
) -> Path:
    """Render the page and write it atomically to ``path`` (.png or .svg)."""
    check_output(Path(path))
    return save_figure(render(sweep, masks=masks, scale=scale, title=title, markers=markers),
                       path)
