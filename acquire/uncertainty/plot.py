"""The uncertainty band on a plot: |Γ| ± U mapped to the panel's scale.

A capture's JSON (``uncertainty.parameters.<Sii>.expanded``) holds U per point;
``attach_from_summary`` reads it beside a Touchstone file into the sweep's metadata
(``uncertainty_expanded``), and ``draw_band`` shades the interval on a match panel. A
band that reaches a perfect match (return loss without an upper end) or |Γ| = 1 (SWR
without one) is clipped to the axis.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np

from acquire.sweep import Sweep

BAND_COLOR = "#9ecae1"
META_KEY = "uncertainty_expanded"


def attach_from_summary(sweep: Sweep, touchstone: Path | str) -> Sweep:
    """``sweep`` with the U arrays of the capture JSON beside ``touchstone``, if it has
    them for this sweep's points; otherwise ``sweep`` unchanged (a plot needs no band)."""
    path = Path(touchstone).with_suffix(".json")
    try:
        data = json.loads(path.read_text())
        params = data["uncertainty"]["parameters"]
    except (OSError, ValueError, KeyError, TypeError):
        return sweep
    bands = {name: block["expanded"] for name, block in params.items()
             if isinstance(block, dict) and isinstance(block.get("expanded"), list)
             and len(block["expanded"]) == sweep.points}
    return sweep.with_meta(**{META_KEY: bands}) if bands else sweep


def draw_band(ax: Any, sweep: Sweep, param: str,
              display: Callable[[np.ndarray], np.ndarray]) -> bool:
    """Shade |``param``| ± U (from the sweep's metadata) on ``ax``; False if none."""
    bands = sweep.meta.get(META_KEY) or {}
    if param not in bands:
        return False
    u = np.asarray(bands[param], np.float64)
    g = np.abs(sweep.param(param))
    lo, hi = ax.get_ylim()
    with np.errstate(divide="ignore", invalid="ignore"):
        ends = [display(np.clip(g - u, 0.0, None)), display(g + u)]
    a, b = (np.clip(np.nan_to_num(e, nan=hi, posinf=hi, neginf=lo), lo, hi) for e in ends)
    ax.fill_between(sweep.freq_hz, a, b, color=BAND_COLOR, alpha=0.6, linewidth=0,
                    label=f"{param} uncertainty U (k=2)", zorder=3)
    return True
