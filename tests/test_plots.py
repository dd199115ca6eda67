"""The plot page: panels, mask drawing, Smith chart geometry and file output.

Smith chart geometry (Pozar, Microwave Engineering, 4th ed., ch. 2): the constant
resistance r maps to the circle centred at (r/(1+r), 0) with radius 1/(1+r); the
constant reactance x to the circle centred at (1, 1/x) with radius 1/|x|.
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

from acquire.check_parse import mask_check
from acquire.plotting import PlotError, plot_file, render
from acquire.sweep import Sweep


def antenna(f, f0=2.45e9, r=45.0, q=12.0):
    ind = q * r / (2 * np.pi * f0)
    cap = 1 / ((2 * np.pi * f0) ** 2 * ind)
    w = 2 * np.pi * np.asarray(f)
    z = r + 1j * (w * ind - 1 / (w * cap))
    return (z - 50) / (z + 50)


F = np.linspace(2.3e9, 2.6e9, 301)
PATCH = mask_check("patch-2g45").mask


def cable_sweep():
    f = np.linspace(10e6, 6e9, 401)
    s = np.zeros((f.size, 2, 2), complex)
    s[:, 0, 0] = s[:, 1, 1] = 0.05 * np.exp(1j * f / 3e8)
    s[:, 1, 0] = s[:, 0, 1] = 10 ** (-3.2 * np.sqrt(f / 6e9) / 20) * np.exp(-2j * np.pi * f * 3e-9)
    return Sweep(f, s, meta={"serial": "C-17"})


def texts(ax):
    return [t.get_text() for t in ax.texts]


def test_import_does_not_load_matplotlib():
    code = "import sys, acquire.plotting; assert 'matplotlib' not in sys.modules"
    subprocess.run([sys.executable, "-c", code], check=True)


def test_page_layout_one_port_with_mask():
    fig = render(Sweep(F, antenna(F, f0=2.48e9), meta={"serial": "P-2"}), masks=[PATCH],
                 title="p2.s1p")
    match, imped, smith = fig.axes
    assert match.get_ylabel() == "SWR" and imped.get_ylabel() == "impedance (ohm)"
    assert "p2.s1p" in fig._suptitle.get_text() and "FAIL" in fig._suptitle.get_text()
    assert "serial P-2" in fig._suptitle.get_text()
    labels = match.get_legend_handles_labels()[1]
    assert labels == ["S11 SWR", "limit: patch-2g45", "fails the mask"]
    assert match.get_title(loc="left").startswith("FAIL  '2.4 GHz band': worst S11 swr 2.0")
    # Resonance and both SWR-2 edges are marked on the match panel and the Smith chart.
    assert {"R", "L", "H"} <= set(texts(match)) and {"R", "L", "H"} <= set(texts(smith))
    table = next(t for t in texts(smith) if "resonance" in t)
    assert "2.48 GHz  45.0 + j0.0 ohm  SWR 1.11" in table
    assert "SWR 2 low edge" in table and "SWR 2.00" in table


def test_grey_print_styles_differ_by_line_and_marker():
    fig = render(Sweep(F, antenna(F, f0=2.48e9)), masks=[PATCH])
    match, imped, _ = fig.axes
    styles = {line.get_label(): line.get_linestyle() for line in imped.get_lines()}
    assert styles["R (S11)"] == "-" and styles["X (S11)"] == "--"
    limit = next(ln for ln in match.get_lines() if ln.get_label() == "limit: patch-2g45")
    assert limit.get_linestyle() == "--"
    fails = next(ln for ln in match.get_lines() if ln.get_label() == "fails the mask")
    assert fails.get_marker() == "X" and fails.get_linestyle() == "None"
    assert any(p.get_hatch() for p in match.collections + match.patches)  # forbidden side


def test_failing_positions_are_the_mask_failures():
    sweep = Sweep(F, antenna(F, f0=2.48e9))
    seg = PATCH.evaluate(sweep).segments[0]
    fig = render(sweep, masks=[PATCH])
    fails = next(ln for ln in fig.axes[0].get_lines() if ln.get_label() == "fails the mask")
    assert set(fails.get_xdata()) <= set(seg.freq_hz[seg.failing])
    assert seg.worst.freq_hz in set(fails.get_xdata())


def test_return_loss_mask_drawn_on_every_match_scale():
    whip = mask_check("whip-915").mask
    f = np.linspace(815e6, 1015e6, 401)
    sweep = Sweep(f, antenna(f, f0=915e6, r=60.0, q=20.0))
    for scale, limit_y in (("return_loss", 10.0), ("s_db", -10.0), ("swr", 1.9249505911)):
        ax = render(sweep, masks=[whip], scale=scale).axes[0]
        line = next(ln for ln in ax.get_lines() if ln.get_label() == "limit: whip-915")
        # RL >= 10 dB is S11 <= -10 dB is SWR <= 1.925 (Pozar ch. 2 conversions).
        assert np.allclose(line.get_ydata(), limit_y, rtol=1e-9)


def test_two_port_page_has_a_panel_per_masked_quantity():
    fig = render(cable_sweep(), masks=[mask_check("cable-6g").mask])
    s11, s21, _ = fig.axes  # match, transmission, Smith: no R/X panel for a cable
    assert s11.get_ylabel() == "reflection (dB)" and s21.get_ylabel() == "transmission (dB)"
    assert "FAIL  'insertion'" in s21.get_title(loc="left")
    assert "PASS  'match to 3 GHz'" in s11.get_title(loc="left")


def test_two_port_shows_all_four_parameters_and_no_impedance_for_a_thru():
    fig = render(cable_sweep())
    match, trans, smith = fig.axes
    assert [ax.get_ylabel() for ax in (match, trans)] == ["SWR", "transmission (dB)"]
    assert match.get_legend_handles_labels()[1] == ["S11 SWR", "S22 SWR"]
    assert trans.get_legend_handles_labels()[1] == ["|S21| (dB)", "|S12| (dB)"]
    assert smith.get_title() == "S11 and S22 Smith chart (normalised to 50 ohm)"
    long = [ln for ln in smith.get_lines() if len(ln.get_xdata()) == 401]
    assert len(long) == 2 and long[0].get_linestyle() != long[1].get_linestyle()


def test_two_port_that_does_not_transmit_keeps_its_impedance_panel():
    f = np.linspace(2.3e9, 2.6e9, 301)
    s = np.zeros((f.size, 2, 2), complex)
    s[:, 0, 0], s[:, 1, 1] = antenna(f), 0.3
    s[:, 1, 0] = s[:, 0, 1] = 10 ** (-45 / 20)  # ports isolated: 45 dB
    labels = [ax.get_ylabel() for ax in render(Sweep(f, s)).axes]
    assert labels == ["SWR", "transmission (dB)", "impedance (ohm)", ""]


def test_q_is_reported_for_a_resonator_not_for_a_thru():
    from acquire.metrics.summary import key_metrics

    f = np.linspace(2.3e9, 2.6e9, 301)
    one = key_metrics(Sweep(f, antenna(f)))["S11"]
    assert one["q_unloaded"] is not None
    s = np.zeros((f.size, 2, 2), complex)
    s[:, 0, 0] = s[:, 1, 1] = 0.2 * antenna(f)  # a small dip in the match of a thru
    s[:, 1, 0] = s[:, 0, 1] = 0.98
    two = key_metrics(Sweep(f, s))["S11"]
    assert two["q_unloaded"] is None and two["q_loaded"] is None


def test_long_traces_stay_thin_lines_on_the_smith_chart(tmp_path):
    f = np.linspace(1e9, 3e9, 10001)
    rng = np.random.default_rng(7)
    g = 0.3 * np.exp(-2j * np.pi * f * 4e-9) + 0.01 * (rng.standard_normal(f.size)
                                                        + 1j * rng.standard_normal(f.size))
    smith = render(Sweep(f, g)).axes[-1]
    (trace,) = [ln for ln in smith.get_lines() if len(ln.get_xdata()) == f.size]
    assert trace.get_linewidth() <= 0.7 and trace.get_marker() == "None"
    plot_file(Sweep(f, g), tmp_path / "long.png")


def test_smith_grid_circles_follow_the_chart_geometry():
    smith = render(Sweep(F, antenna(F))).axes[-1]
    grid = [ln for ln in smith.get_lines() if ln.get_label().startswith("_")]
    checked_r = checked_x = 0
    for line in grid:
        x, y = np.asarray(line.get_xdata(), float), np.asarray(line.get_ydata(), float)
        if x.size < 100:
            continue
        for r in (0.2, 0.5, 1.0, 2.0, 5.0):
            if np.allclose(np.hypot(x - r / (1 + r), y), 1 / (1 + r), atol=1e-9):
                checked_r += 1
        for xv in (0.2, 0.5, 1.0, 2.0, 5.0, -0.2, -0.5, -1.0, -2.0, -5.0):
            if np.allclose(np.hypot(x - 1, y - 1 / xv), 1 / abs(xv), atol=1e-9):
                checked_x += 1
                assert np.all(np.hypot(x, y) <= 1 + 1e-9)  # arcs stay inside |Γ| = 1
    assert checked_r == 5 and checked_x == 10


def test_smith_trace_is_the_reflection_coefficient():
    g = antenna(F)
    smith = render(Sweep(F, g)).axes[-1]
    trace = next(ln for ln in smith.get_lines() if len(ln.get_xdata()) == F.size)
    assert np.allclose(trace.get_xdata(), g.real) and np.allclose(trace.get_ydata(), g.imag)


@pytest.mark.parametrize("suffix", [".png", ".svg"])
def test_plot_file_writes_png_or_svg(tmp_path, suffix):
    out = plot_file(Sweep(F, antenna(F)), tmp_path / f"page{suffix}", masks=[PATCH])
    data = out.read_bytes()
    assert data.startswith(b"\x89PNG") if suffix == ".png" else b"<svg" in data[:2000]


def test_plot_errors_are_clear(tmp_path):
    with pytest.raises(PlotError, match=r"must end in \.png or \.svg"):
        plot_file(Sweep(F, antenna(F)), tmp_path / "page.s1p")
    with pytest.raises(PlotError, match="unknown scale 'vswr'"):
        render(Sweep(F, antenna(F)), scale="vswr")
    with pytest.raises(PlotError, match="at least 2 sweep points"):
        render(Sweep(F[:1], antenna(F[:1])))


def test_non_finite_data_still_draws_without_markers():
    g = antenna(F)
    g[5] = np.nan
    fig = render(Sweep(F, g))
    assert not any("resonance" in t for t in texts(fig.axes[-1]))


def test_a_flat_match_is_marked_as_a_minimum_not_a_resonance():
    f = np.linspace(10e6, 6e9, 401)
    sweep = Sweep(f, 0.05 * np.exp(1j * f / 3e8))  # |S11| constant: no dip crosses SWR 2
    smith = render(sweep).axes[-1]
    assert any("minimum |S11|" in t for t in texts(smith))
    assert not any("resonance" in t for t in texts(smith))


def test_a_thru_is_marked_at_its_worst_match_not_a_resonance():
    sweep = cable_sweep()
    bump = np.where(np.arange(401) == 200, 2.0, 1.0)[:, None, None]  # worst S11 at f[200]
    smith = render(sweep.with_data(sweep.s * bump)).axes[-1]
    table = next(t for t in texts(smith) if "worst match" in t)
    assert table.startswith("W worst match |S11|") and "resonance" not in table
    assert "3.005 GHz" in table  # f[200] = 10 MHz + 200 * 14.975 MHz


def test_phase_panel_breaks_the_line_at_each_wrap(tmp_path):
    (tmp_path / "ph.yaml").write_text(
        "parameter: S21\nquantity: phase\nsegments: [{from: 1 GHz, to: 2 GHz, upper: 180 deg}]\n")
    from acquire.masks import load_mask

    ax = render(cable_sweep(), masks=[load_mask(tmp_path / "ph.yaml")]).axes[2]
    line = next(ln for ln in ax.get_lines() if ln.get_label() == "S21 phase (deg)")
    y = np.asarray(line.get_ydata(), float)
    assert np.isnan(y).sum() >= 10  # 3 ns over 6 GHz: 18 turns
    finite = y[np.isfinite(y)]
    assert np.all(np.abs(np.diff(y)[np.isfinite(np.diff(y))]) < 180) and finite.size > 300


def test_dollar_signs_in_user_text_stay_literal(tmp_path):
    # Issue 10.11: a '$' in a title, file name or mask name was read as math markup;
    # an odd formula crashed the drawing. Every text is drawn as written.
    (tmp_path / "m.yaml").write_text(
        "name: cost $\\frac{1\nparameter: S11\nquantity: swr\n"
        "segments: [{from: 2.4 GHz, to: 2.5 GHz, upper: 2}]\n")
    from acquire.masks import load_mask

    title = r"unit $x^{ 7 and $\sqrt{$ price"
    out = plot_file(Sweep(F, antenna(F)), tmp_path / "p.svg", title=title,
                    masks=[load_mask(tmp_path / "m.yaml")])
    svg = out.read_text()
    assert "unit $x^{ 7 and $\\sqrt{$ price" in svg  # SVG text stays text, as written
    assert "limit: cost $\\frac{1" in svg
    plot_file(Sweep(F, antenna(F)), tmp_path / "p.png", title=title)  # PNG too


def test_svg_text_is_text_not_outlines(tmp_path):
    svg = plot_file(Sweep(F, antenna(F)), tmp_path / "p.svg", title="patch P-9").read_text()
    assert "<text" in svg and "patch P-9" in svg
    assert "Smith chart (normalised to 50 ohm)" in svg
