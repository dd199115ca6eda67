"""The soak report's pictures (headless matplotlib, no pyplot), readable in grey.

- ``drift.png``: the tracked metrics against time since the start with their alarm
  thresholds (both signs for a shift), alarms as dashed vertical lines named in words,
  restarts of the daemon as wide grey lines, faults as crosses and missed sweeps as ticks
  along the bottom, spans held for disk space hatched.
- ``allan.png``: the overlapping Allan deviation of the resonance against τ on log-log
  axes, with guide slopes −½ (white noise) and +1 (linear drift) through the first point
  (NIST SP 1065 reads the noise type from these slopes).
- ``deviation.png``: the largest change from the reference at each frequency over the
  whole soak (the envelope), with the last sweep's change dashed.
"""

from __future__ import annotations

import io
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from acquire.storage import replace_atomic

INK = "black"
MID = "#555555"
LIGHT = "#9a9a9a"
SHADE = "#ececec"
GRID = "#c8c8c8"
DPI = 110


def time_axis(t_s: np.ndarray) -> tuple[float, str]:
    """The unit (seconds per unit) that suits the times' span, and the axis label."""
    span = float(np.nanmax(t_s)) if np.isfinite(t_s).any() else 0.0
    for factor, unit in ((3600.0, "h"), (60.0, "min")):
        if span >= 3 * factor:
            return factor, f"time since start ({unit})"
    return 1.0, "time since start (s)"


def _save(fig: Any, path: Path) -> Path:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=DPI)
    return replace_atomic(path, buffer.getvalue())


def _style(ax: Any, ylabel: str) -> None:
    ax.grid(True, color=GRID, linewidth=0.6)
    ax.set_ylabel(ylabel)
    ax.tick_params(labelsize=9)


@dataclass(frozen=True)
class Panel:
    """One drift quantity: its axis label, a value per sweep and its alarm threshold.
    A ``signed`` quantity (a shift) alarms on its magnitude: both +/- lines are drawn."""

    label: str
    values: np.ndarray
    threshold: float | None = None
    signed: bool = False


@dataclass(frozen=True)
class Events:
    """What happened along the time axis (seconds since the start)."""

    alarms: list[tuple[float, str]]  # (time, human label)
    faults: np.ndarray
    restarts: np.ndarray
    missed: np.ndarray
    held: list[tuple[float, float]] = field(default_factory=list)  # (from, to): disk holds


def drift_plot(path: Path, panels: list[Panel], t_s: np.ndarray, events: Events,
               title: str) -> Path:
    """``drift.png`` (see :func:`drift_figure`)."""
    return _save(drift_figure(panels, t_s, events, title), path)


def drift_figure(panels: list[Panel], t_s: np.ndarray, events: Events, title: str) -> Any:
    """The drift quantities against time, thresholds and events marked (text kept inside
    the figure: legends and labels sit in the axes, the layout makes room for them)."""
    from matplotlib.figure import Figure

    factor, xlabel = time_axis(t_s)
    x = t_s / factor
    fig = Figure(figsize=(11.0, 2.2 + 2.0 * len(panels)), layout="constrained")
    axes = fig.subplots(len(panels), 1, sharex=True, squeeze=False)[:, 0]
    for ax, panel in zip(axes, panels, strict=True):
        # nan values (missed sweeps) break the line, so a gap never looks like data
        ax.plot(x, panel.values, color=INK, linewidth=1.0, marker=".", markersize=3)
        if panel.threshold is not None:
            levels = (panel.threshold, -panel.threshold) if panel.signed else (panel.threshold,)
            for level in levels:
                ax.axhline(level, color=MID, linestyle=(0, (6, 3)), linewidth=1.0)
            ax.text(0.995, 0.97, "alarm threshold" + (" (+/-)" if panel.signed else ""),
                    transform=ax.transAxes, ha="right", va="top", fontsize=8, color=MID,
                    bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.85, "pad": 1})
        for when, _label in events.alarms:
            ax.axvline(when / factor, color=INK, linestyle=(0, (2, 2)), linewidth=0.9)
        for when in events.restarts:
            ax.axvline(when / factor, color=LIGHT, linestyle="-", linewidth=2.0, alpha=0.7)
        for start, end in events.held:
            ax.axvspan(start / factor, end / factor, facecolor=SHADE, edgecolor=LIGHT,
                       hatch="//", linewidth=0.0, zorder=0)
        _style(ax, panel.label)
    _mark_events(axes, events, factor)
    axes[-1].set_xlabel(xlabel)
    fig.suptitle(title, fontsize=12, fontweight="bold")
    return fig


def _mark_events(axes: Any, events: Events, factor: float) -> None:
    bottom = axes[-1]
    on_axis = {"linestyle": "none", "transform": bottom.get_xaxis_transform(), "clip_on": True}
    if events.faults.size:
        bottom.plot(events.faults / factor, np.full(events.faults.size, 0.04), marker="x",
                    color=INK, markersize=7, label=f"faults ({events.faults.size})", **on_axis)
    if events.missed.size:
        bottom.plot(events.missed / factor, np.full(events.missed.size, 0.02), marker="|",
                    color=LIGHT, markersize=10, label=f"missed sweeps ({events.missed.size})",
                    **on_axis)
    if events.restarts.size:
        bottom.plot([], [], color=LIGHT, linewidth=2.0,
                    label=f"restarts of the daemon ({events.restarts.size})")
    if events.alarms:
        bottom.plot([], [], color=INK, linestyle=(0, (2, 2)),
                    label=f"alarms ({len(events.alarms)})")
    if events.held:
        bottom.fill_between([], [], facecolor=SHADE, edgecolor=LIGHT, hatch="//",
                            linewidth=0.0, label=f"held for disk space ({len(events.held)})")
    if (events.faults.size or events.missed.size or events.alarms or events.restarts.size
            or events.held):
        bottom.legend(loc="upper left", fontsize=8, framealpha=0.9)
    for when, label in events.alarms[:12]:
        axes[0].annotate(label, (when / factor, 0.97), xycoords=("data", "axes fraction"),
                         rotation=90, ha="right", va="top", fontsize=7, color=INK,
                         annotation_clip=True)


def allan_plot(path: Path, points: list[dict[str, Any]], threshold_hz: float | None,
               title: str, note: str = "not enough data") -> Path:
    from matplotlib.figure import Figure

    fig = Figure(figsize=(8.0, 5.5), layout="constrained")
    ax = fig.add_subplot()
    tau = np.array([p["tau_s"] for p in points], dtype=float)
    adev = np.array([p["adev"] for p in points], dtype=float)
    ok = (tau > 0) & (adev > 0)
    if ok.any():
        ax.loglog(tau[ok], adev[ok], color=INK, marker="o", linewidth=1.2,
                  label="overlapping Allan deviation")
        t0, a0 = tau[ok][0], adev[ok][0]
        guide = np.array([t0, tau[ok][-1]]) if ok.sum() > 1 else np.array([t0, 4 * t0])
        ax.loglog(guide, a0 * (guide / t0) ** -0.5, color=MID, linestyle=(0, (6, 3)),
                  linewidth=0.9, label="slope -1/2 (white noise)")
        ax.loglog(guide, a0 * (guide / t0), color=LIGHT, linestyle=(0, (1, 2)),
                  linewidth=1.2, label="slope +1 (linear drift)")
        for t, a, p in zip(tau[ok], adev[ok], [p for p, good in zip(points, ok, strict=True)
                                                if good], strict=True):
            ax.annotate(f"n={p['terms']}", (t, a), textcoords="offset points", xytext=(4, 4),
                        fontsize=7, color=MID)
    else:
        ax.text(0.5, 0.5, "Allan deviation: " + note, ha="center", va="center",
                transform=ax.transAxes, wrap=True, fontsize=9)
    if threshold_hz is not None:
        ax.axhline(threshold_hz, color=INK, linestyle=(0, (2, 2)), linewidth=1.0,
                   label="alarm threshold")
    ax.grid(True, which="both", color=GRID, linewidth=0.5)
    ax.set_xlabel("averaging time tau (s)")
    ax.set_ylabel("Allan deviation of the resonance (Hz)")
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=8, loc="best")
    fig.suptitle(title, fontsize=12, fontweight="bold")
    return _save(fig, path)


def deviation_plot(path: Path, freq_hz: np.ndarray, env_db: np.ndarray, env_deg: np.ndarray,
                   last_db: np.ndarray | None, last_deg: np.ndarray | None,
                   band_hz: tuple[float, float] | None, thresholds: tuple[float | None, ...],
                   title: str, parameter: str = "S11") -> Path:
    from matplotlib.figure import Figure

    from acquire.units import format_frequency

    scale, unit = 1e9, "GHz"
    if float(np.max(freq_hz)) < 1e9:
        scale, unit = 1e6, "MHz"
    f = freq_hz / scale
    fig = Figure(figsize=(11.0, 6.5), layout="constrained")
    axes = fig.subplots(2, 1, sharex=True)
    data = ((axes[0], env_db, last_db, f"|change of |{parameter}|| (dB)", thresholds[0]),
            (axes[1], env_deg, last_deg, f"|change of phase {parameter}| (deg)",
             thresholds[1]))
    for ax, env, last, label, threshold in data:
        ax.plot(f, env, color=INK, linewidth=1.3, label="largest over the soak")
        if last is not None:
            ax.plot(f, np.abs(last), color=MID, linewidth=1.0, linestyle=(0, (5, 3)),
                    label="last sweep")
        if band_hz is not None:
            ax.axvspan(band_hz[0] / scale, band_hz[1] / scale, color=SHADE, zorder=0,
                       label=f"band {format_frequency(band_hz[0])}..{format_frequency(band_hz[1])}")
        if threshold is not None:
            ax.axhline(threshold, color=LIGHT, linestyle=(0, (2, 2)), linewidth=1.2,
                       label="alarm threshold")
        ax.set_ylim(bottom=0)
        _style(ax, label)
        ax.legend(fontsize=8, loc="upper right")
    axes[1].set_xlabel(f"frequency ({unit})")
    fig.suptitle(title, fontsize=12, fontweight="bold")
    return _save(fig, path)
