"""The uncertainty band on the match panel, from the capture JSON beside a file.

The band's edges are |Γ| ± U mapped through the return-loss and SWR relations
(RL = −20·log10|Γ|, SWR = (1 + |Γ|)/(1 − |Γ|); Pozar, Microwave Engineering, 2.3).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from acquire.cli import main
from acquire.plots import render
from acquire.sweep import Sweep
from acquire.touchstone import write_touchstone
from acquire.uncertainty.plot import META_KEY, attach_from_summary

F = np.linspace(2.3e9, 2.6e9, 61)
G = 0.2 + 0.25 * np.cos(np.linspace(0, np.pi, F.size))  # |Γ| from 0.45 down to −0.05 → 0
U = np.full(F.size, 0.02)


def _band(fig, label: str):
    for ax in fig.axes:
        for coll in ax.collections:
            if coll.get_label() == label:
                return ax, coll
    raise AssertionError(f"no band labelled {label!r}")


@pytest.mark.parametrize("scale", ["return_loss", "swr"])
def test_band_edges_follow_the_interval(scale: str) -> None:
    g = np.abs(G)
    sweep = Sweep(F, G.astype(complex).reshape(-1, 1, 1), meta={META_KEY: {"S11": list(U)}})
    fig = render(sweep, scale=scale)
    ax, band = _band(fig, "S11 uncertainty U (k=2)")
    path = band.get_paths()[0].vertices
    k = 10  # |Γ| = 0.2 + 0.25·cos(π/6) = 0.4165
    low_end, high_end = g[k] - U[k], g[k] + U[k]
    ys = path[np.isclose(path[:, 0], F[k]), 1]
    if scale == "return_loss":
        want = sorted([-20 * np.log10(high_end), -20 * np.log10(low_end)])
    else:
        want = sorted([(1 + low_end) / (1 - low_end), (1 + high_end) / (1 - high_end)])
    assert sorted(ys)[0] == pytest.approx(want[0]) and sorted(ys)[-1] == pytest.approx(want[1])
    top = ax.get_ylim()[1]
    assert np.all(path[:, 1] <= top + 1e-9)  # RL of a perfect match is clipped to the axis


def test_plot_command_draws_the_band_from_the_capture_json(tmp_path: Path) -> None:
    ts = write_touchstone(tmp_path / "unit.s1p", Sweep(F, G.astype(complex).reshape(-1, 1, 1)))
    (tmp_path / "unit.json").write_text(json.dumps(
        {"uncertainty": {"parameters": {"S11": {"expanded": list(U)}}}}))
    sweep = attach_from_summary(Sweep(F, G.astype(complex).reshape(-1, 1, 1)), ts)
    assert sweep.meta[META_KEY]["S11"] == list(U)
    assert main(["plot", str(ts), "-o", str(tmp_path / "unit.png")]) == 0
    assert (tmp_path / "unit.png").stat().st_size > 10_000
    (tmp_path / "unit.json").write_text("{not json")  # a broken JSON: no band, no error
    plain = Sweep(F, G.astype(complex).reshape(-1, 1, 1))
    assert attach_from_summary(plain, ts).meta.get(META_KEY) is None
