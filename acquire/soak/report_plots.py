"""The soak report's pictures (headless matplotlib, no pyplot), readable in grey.

- ``drift.png``: the tracked metrics against time since the start, alarms as dashed
  vertical lines with their metric named, faults as crosses and missed sweeps as ticks
  along the bottom.
- ``allan.png``: the overlapping Allan deviation of the resonance against τ on log-log
  axes, with guide slopes −½ (white noise) and +1 (linear drift) through the first point
  (NIST SP 1065 reads the noise type from these slopes).
- ``deviation.png``: the largest change from the reference at each frequency over the
  whole soak (the envelope), with the last sweep's change dashed.
"""

from __future__ import annotations

import io
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


def time_axis(t_s: np.ndarray) -> tuple[np.ndarray, str]:
    """Times in the unit that suits their span, and the axis label."""
    span = float(np.nanmax(t_s)) if np.isfinite(t_s).any() else 0.0
    for factor, unit in ((3600.0, "h"), (60.0, "min")):
        if span >= 3 * factor:
            return t_s / factor, f"time since start ({unit})"
    return t_s, "time since start (s)"


def _save(fig: Any, path: Path) -> Path:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=DPI)
    return replace_atomic(path, buffer.getvalue())


def _style(ax: Any, ylabel: str) -> None:
    ax.grid(True, color=GRID, linewidth=0.6)
    ax.set_ylabel(ylabel)
    ax.tick_params(labelsize=9)


def drift_plot(path: Path, panels: list[tuple[str, np.ndarray, float | None]],
               t_s: np.ndarray, alarms: list[tuple[float, str]], faults: np.ndarray,
               missed: np.ndarray, title: str) -> Path:
    """``panels`` = (label, values per sweep, threshold or None), all on ``t_s``."""
    from matplotlib.figure import Figure

    x, xlabel = time_axis(t_s)
    ok = np.isfinite(x) & (x != 0)  # divide only there: 0/0 at t = 0 would warn
    scale = t_s[ok] / x[ok]
    factor = float(scale[0]) if scale.size else 1.0
    fig = Figure(figsize=(11.0, 2.2 + 2.0 * len(panels)), layout="constrained")
    axes = fig.subplots(len(panels), 1, sharex=True, squeeze=False)[:, 0]
    for ax, (label, values, threshold) in zip(axes, panels, strict=True):
        # nan values (missed sweeps) break the line, so a gap never looks like data
        ax.plot(x, values, color=INK, linewidth=1.0, marker=".", markersize=3)
        if threshold is not None:
            ax.axhline(threshold, color=MID, linestyle=(0, (6, 3)), linewidth=1.0)
            ax.annotate("alarm threshold", (1.0, threshold), xycoords=("axes fraction", "data"),
                        ha="right", va="bottom", fontsize=8, color=MID)
        for when, _metric in alarms:
            ax.axvline(when / factor, color=INK, linestyle=(0, (2, 2)), linewidth=0.9)
        _style(ax, label)
    bottom = axes[-1]
    if faults.size:
        bottom.plot(faults / factor, np.zeros_like(faults), linestyle="none", marker="x",
                    color=INK, markersize=7, transform=bottom.get_xaxis_transform(),
                    clip_on=False, label=f"faults ({faults.size})")
    if missed.size:
        bottom.plot(missed / factor, np.zeros_like(missed), linestyle="none", marker="|",
                    color=LIGHT, markersize=12, transform=bottom.get_xaxis_transform(),
                    clip_on=False, label=f"missed sweeps ({missed.size})")
    if alarms:
        bottom.plot([], [], color=INK, linestyle=(0, (2, 2)), label=f"alarms ({len(alarms)})")
    if faults.size or missed.size or alarms:
        bottom.legend(loc="upper left", fontsize=8, framealpha=0.9)
    for when, metric in alarms[:12]:
        axes[0].annotate(metric, (when / factor, 1.0), xycoords=("data", "axes fraction"),
                         rotation=90, ha="right", va="top", fontsize=7, color=INK)
    bottom.set_xlabel(xlabel)
    fig.suptitle(title, fontsize=12, fontweight="bold")
    return _save(fig, path)


def allan_plot(path: Path, points: list[dict[str, Any]], threshold_hz: float | None,
               title: str) -> Path:
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
        ax.text(0.5, 0.5, "not enough sweeps for an Allan deviation", ha="center",
                va="center", transform=ax.transAxes)
    if threshold_hz is not None:
        ax.axhline(threshold_hz, color=INK, linestyle=(0, (2, 2)), linewidth=1.0,
                   label="alarm threshold")
    ax.grid(True, which="both", color=GRID, linewidth=0.5)
    ax.set_xlabel("averaging time tau (s)")
    ax.set_ylabel("Allan deviation of the resonance (Hz)")
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
