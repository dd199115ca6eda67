"""Overlays: several files on one page in any quantity, masks drawn once, difference
traces. Expected values come from the circuit model evaluated here in closed form
(series RLC: Z = R + j(wL - 1/(wC)); Gamma = (Z - Z0)/(Z + Z0), SWR and dB as in
Pozar, Microwave Engineering, 4th ed., ch. 2) and from a pure delay exp(-j w tau),
whose group delay is tau by definition.
"""

from __future__ import annotations

import argparse

import numpy as np
import pytest

from acquire.check_parse import mask_check
from acquire.commands import plot as plot_cmd
from acquire.plotting import PlotError
from acquire.plotting.overlay import Source, render_overlay
from acquire.sweep import Sweep

PATCH = mask_check("patch-2g45").mask


def antenna(f, f0=2.45e9, r=45.0, q=12.0):
    ind = q * r / (2 * np.pi * f0)
    cap = 1 / ((2 * np.pi * f0) ** 2 * ind)
    w = 2 * np.pi * np.asarray(f)
    z = r + 1j * (w * ind - 1 / (w * cap))
    return (z - 50) / (z + 50)


F = np.linspace(2.3e9, 2.6e9, 301)


def line(ax, label):
    return next(ln for ln in ax.get_lines() if ln.get_label() == label)


def test_files_share_one_panel_with_the_mask_drawn_once():
    golden, dut = Source("golden.s1p", Sweep(F, antenna(F))), Source(
        "dut.s1p", Sweep(F, antenna(F, f0=2.48e9)))
    fig = render_overlay([golden, dut], masks=[PATCH])
    main, smith = fig.axes
    labels = main.get_legend_handles_labels()[1]
    assert labels[:2] == ["golden.s1p: PASS SWR", "dut.s1p: FAIL SWR"]
    assert labels.count("limit: patch-2g45") == 1 and "fails the mask" in labels
    limits = [ln for ln in main.get_lines() if ln.get_linestyle() == "--"
              and np.allclose(ln.get_ydata(), 2.0)]
    assert len(limits) == 1  # one SWR 2 limit, not one per file
    swr = (1 + np.abs(antenna(F, f0=2.48e9))) / (1 - np.abs(antenna(F, f0=2.48e9)))
    assert np.allclose(line(main, "dut.s1p: FAIL SWR").get_ydata(), swr)
    assert line(main, "golden.s1p: PASS SWR").get_linestyle() != line(
        main, "dut.s1p: FAIL SWR").get_linestyle()  # told apart in grey print
    assert sum(len(ln.get_xdata()) == F.size for ln in smith.get_lines()) == 2


def test_difference_in_db_on_the_first_grid():
    f2 = np.linspace(2.35e9, 2.6e9, 126)  # another grid, starting later
    ref = Source("morning.s1p", Sweep(F, antenna(F)))
    late = Source("evening.s1p", Sweep(f2, antenna(f2, f0=2.455e9)))
    fig = render_overlay([ref, late], quantity="s_db", difference=True)
    diff = fig.axes[1]
    y = np.asarray(line(diff, "evening.s1p - morning.s1p").get_ydata(), float)
    inside = F >= 2.35e9
    assert np.all(np.isnan(y[~inside]))
    expected = 20 * np.log10(np.abs(antenna(F[inside], f0=2.455e9))) - 20 * np.log10(
        np.abs(antenna(F[inside])))
    # the evening trace is interpolated linearly onto the morning grid (2 MHz steps)
    assert np.allclose(y[inside], expected, atol=0.05)
    assert diff.get_ylabel() == "difference in dB (dB)"


def test_transmission_overlay_in_group_delay_and_phase_difference_wraps():
    f = np.linspace(1e9, 2e9, 201)

    def thru(tau):
        s = np.zeros((f.size, 2, 2), complex)
        s[:, 1, 0] = s[:, 0, 1] = 0.9 * np.exp(-2j * np.pi * f * tau)
        return Sweep(f, s)

    a, b = Source("a.s2p", thru(2.5e-9)), Source("b.s2p", thru(2.6e-9))
    fig = render_overlay([a, b], param="S21", quantity="group_delay")
    assert len(fig.axes) == 1  # no Smith chart for a transmission
    assert np.allclose(line(fig.axes[0], "a.s2p group delay (ns)").get_ydata(), 2.5)
    fig = render_overlay([a, b], param="S21", quantity="phase", difference=True)
    d = np.asarray(fig.axes[1].get_lines()[-1].get_ydata(), float)
    expected = (-360 * f * 0.1e-9 + 180) % 360 - 180  # -0.1 ns of extra delay, wrapped
    assert np.allclose(d, expected, atol=1e-6) and np.all(np.abs(d) <= 180)


@pytest.mark.parametrize(("kwargs", "message"), [
    ({"param": "S21", "quantity": "swr"}, "swr is for a reflection"),
    ({"quantity": "vswr"}, "unknown quantity 'vswr'"),
    ({"difference": True}, "needs at least two files"),
    ({"param": "S22"}, "S22 does not exist in a 1-port sweep"),
])
def test_overlay_errors_are_one_line(kwargs, message):
    with pytest.raises(PlotError, match=message):
        render_overlay([Source("x.s1p", Sweep(F, antenna(F)))], **kwargs)


def test_plot_command_overlays_files(tmp_path, capsys):
    from acquire.touchstone import write_touchstone

    a = write_touchstone(tmp_path / "golden.s1p", Sweep(F, antenna(F)))
    b = write_touchstone(tmp_path / "dut.s1p", Sweep(F, antenna(F, f0=2.48e9)))
    parser = argparse.ArgumentParser()
    plot_cmd.add_arguments(parser)
    args = parser.parse_args([str(a), str(b), "--mask", "patch-2g45", "--difference",
                              "--quantity", "return-loss", "-o", str(tmp_path / "o.svg")])
    assert plot_cmd.run(args) == 1  # the DUT fails the mask
    svg = (tmp_path / "o.svg").read_text()
    assert "dut.s1p: FAIL return loss" in svg and "dut.s1p - golden.s1p" in svg
    args = parser.parse_args([str(a), str(b)])
    assert plot_cmd.run(args) == 0 and (tmp_path / "golden-overlay.png").exists()
