"""Writing a figure to a file: PNG or SVG, atomically; SVG text stays text."""

from __future__ import annotations

import io
from pathlib import Path
from typing import Any

from acquire.plotting.common import PlotError
from acquire.storage import replace_atomic

FORMATS = (".png", ".svg")


def check_output(path: Path) -> None:
    """Refuse an output name that is not .png or .svg (before any work is done)."""
    if path.suffix.lower() not in FORMATS:
        raise PlotError(f"plot output {path}: the name must end in .png or .svg")


def figure_bytes(fig: Any, fmt: str, dpi: int = 110) -> bytes:
    """The figure as PNG or SVG bytes; in SVG every text is a <text> element (searchable,
    selectable), not glyph outlines."""
    import matplotlib

    buffer = io.BytesIO()
    with matplotlib.rc_context({"svg.fonttype": "none"}):
        fig.savefig(buffer, format=fmt, dpi=dpi)
    return buffer.getvalue()


def save_figure(fig: Any, path: Path | str) -> Path:
    """Write ``fig`` to ``path`` (.png or .svg) atomically."""
    path = Path(path)
    check_output(path)
    return replace_atomic(path, figure_bytes(fig, path.suffix.lower()[1:]))
