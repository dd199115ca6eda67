"""Distance-to-fault picture: reflection level against distance, faults marked.

Top panel: return loss (positive dB, faults point down toward small values) or the
reflection level, against one-way distance; each listed reflection carries a marker
with its distance; zone limits are drawn as steps with the forbidden side hatched and
reflections over a limit marked in a second style. Low-pass mode adds the impedance
profile read from the step response. Headless (Agg via ``Figure``), grey with one accent
for failures, written atomically. User text (titles, zone names) is shown as plain text:
TeX and math parsing are off for it, so no name is ever read as markup.
"""

from __future__ import annotations

import io
from pathlib import Path
from typing import Any

import numpy as np

from acquire.storage import replace_atomic
from acquire.timedomain.checks import Zone
from acquire.timedomain.distance import DistanceProfile
from acquire.timedomain.peaks import Peak
from drivers.errors import SweepdError

FORMATS = (".png", ".svg")
INK, LIMIT, HATCH, FAIL, GRID = "black", "#404040", "#8c8c8c", "#c00000", "#c4c4c4"
MAX_LABELS = 12


class DtfPlotError(SweepdError):
    """The picture cannot be made as asked."""


# User text (titles, zone names) is drawn exactly as typed: no math markup, no TeX.
PLAIN = {"parse_math": False, "usetex": False}


def write_plot(profile: DistanceProfile, peaks: list[Peak], path: Path | str, *,
               zones: tuple[Zone, ...] = (), failing: tuple[float, ...] = (),
               title: str = "") -> Path:
    """Render and write atomically (.png or .svg); ``failing`` lists failing distances."""
    path = Path(path)
    if path.suffix.lower() not in FORMATS:
        raise DtfPlotError(f"plot output {path}: the name must end in .png or .svg")
    import matplotlib

    with matplotlib.rc_context({"text.usetex": False}):
        fig = render(profile, peaks, zones=zones, failing=failing, title=title)
        buffer = io.BytesIO()
        fig.savefig(buffer, format=path.suffix.lower()[1:], dpi=110)
    return replace_atomic(path, buffer.getvalue())


def render(profile: DistanceProfile, peaks: list[Peak], *, zones: tuple[Zone, ...] = (),
           failing: tuple[float, ...] = (), title: str = "") -> Any:
    from matplotlib.figure import Figure

    impedance = profile.impedance_ohm
    rows = 2 if impedance is not None else 1
    fig = Figure(figsize=(12.0, 4.2 * rows + 1.0), layout="constrained")
    axes = fig.subplots(rows, 1, sharex=True, squeeze=False)[:, 0]
    _level_panel(axes[0], profile, peaks, zones, set(failing))
    if impedance is not None:
        _impedance_panel(axes[1], profile, impedance)
    axes[-1].set_xlabel("distance (m), velocity factor "
                        f"{profile.line.velocity_factor:g}")
    axes[-1].set_xlim(0.0, profile.shown_range_m)
    fig.suptitle(title or "distance to fault", fontsize=12, fontweight="bold", **PLAIN)
    return fig


def _level_panel(ax: Any, profile: DistanceProfile, peaks: list[Peak],
                 zones: tuple[Zone, ...], failing: set[float]) -> None:
    rl = np.clip(profile.return_loss_db, -10.0, 120.0)
    ax.plot(profile.distance_m, rl, color=INK, linewidth=0.9)
    top = float(min(np.nanmax(rl), 80.0)) + 5.0
    for zone in zones:
        _zone_limit(ax, zone, profile.shown_range_m, top)
    for k, peak in enumerate(peaks):
        bad = peak.distance_m in failing
        ax.plot([peak.distance_m], [peak.return_loss_db], marker="v" if bad else "o",
                color=FAIL if bad else INK, markersize=7 if bad else 5, linestyle="none")
        if k < MAX_LABELS:
            ax.annotate(f"{peak.distance_m:.2f} m\n{peak.return_loss_db:.1f} dB",
                        (peak.distance_m, peak.return_loss_db), textcoords="offset points",
                        xytext=(4, -22), fontsize=7, color=FAIL if bad else INK)
    ax.set_ylim(top, max(float(np.nanmin(rl)) - 3.0, -5.0))  # small RL (bad) at the top
    ax.set_ylabel("return loss (dB)")
    ax.grid(True, color=GRID, linewidth=0.5)
    ax.set_title(_axis_note(profile), fontsize=9, loc="left", **PLAIN)


def _zone_limit(ax: Any, zone: Zone, shown_m: float, top: float) -> None:
    to = shown_m if zone.to_m is None else zone.to_m
    limit_rl = -zone.max_level_db
    ax.plot([zone.from_m, to], [limit_rl, limit_rl], color=LIMIT, linewidth=1.4)
    ax.fill_between([zone.from_m, to], limit_rl, min(limit_rl, -5.0) - 10.0, facecolor="none",
                    edgecolor=HATCH, hatch="///", linewidth=0.0)
    ax.annotate(zone.name, (zone.from_m, limit_rl), textcoords="offset points",
                xytext=(2, 3), fontsize=7, color=LIMIT, **PLAIN)


def _impedance_panel(ax: Any, profile: DistanceProfile, impedance: np.ndarray) -> None:
    z = np.clip(impedance, 0.0, 5.0 * profile.line.z0)
    ax.plot(profile.distance_m, z, color=INK, linewidth=0.9)
    ax.axhline(profile.line.z0, color=LIMIT, linewidth=0.6, linestyle="--")
    ax.set_ylabel("impedance (ohm), from the step")
    ax.grid(True, color=GRID, linewidth=0.5)


def _axis_note(profile: DistanceProfile) -> str:
    r = profile.response
    loss = ("no loss compensation" if profile.loss_applied_db_per_m is None
            else f"loss {profile.loss_applied_db_per_m:g} dB/m compensated")
    return (f"{r.mode}, window {r.window.name} (sidelobes {r.window.sidelobe_db:.0f} dB), "
            f"resolution {profile.windowed_resolution_m:.3g} m, "
            f"range {profile.alias_free_range_m:.4g} m, {loss}")
