"""Soak statistics speak only once there is enough data, and the drift picture says what it
shows: both signs of a shift threshold, alarms in words, faults and restarts on the time
axis, every piece of text inside the figure."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from test_soak_support import soak_plan, submit

from acquire.soak.report import write_report
from acquire.soak.report_plots import Events, Panel, drift_figure
from acquire.soak.spool import Spool
from acquire.soak.statistics import MIN_ALLAN_TERMS, Minimums, allan_points, trend_per_hour
from acquire.soak.worker import SoakWorker, StopSignal
from simulators.server import SimServer


def test_a_six_second_soak_has_no_trend() -> None:
    # the defect: six seconds of noisy readings were reported as a trend of -38 MHz/h
    t = np.linspace(0.0, 6.0, 30)
    y = np.random.default_rng(1).normal(0.0, 5e4, t.size)
    shown = trend_per_hour(t, y, Minimums())
    assert isinstance(shown, str) and shown.startswith("not enough data (30 sweep(s) over")
    assert "needs at least 20 over 10 min" in shown


def test_trend_once_ready_is_the_least_squares_slope() -> None:
    # a straight line y = a + b t: ordinary least squares returns b exactly (any textbook)
    t = np.arange(0.0, 1200.0, 30.0)
    y = 2.45e9 + 1.5 * t
    y[7] = np.nan  # a missed sweep is left out, not counted as zero
    assert trend_per_hour(t, y, Minimums()) == pytest.approx(1.5 * 3600.0, rel=1e-9)


def test_allan_points_need_minimums_and_enough_terms() -> None:
    rng = np.random.default_rng(2)
    y = rng.normal(0.0, 1e3, 40)
    t = np.arange(40) * 1.0
    assert isinstance(allan_points(y[:5], t[:5], 1.0, Minimums(min_span_s=0.0)), str)
    points = allan_points(y, t, 1.0, Minimums(min_span_s=0.0))
    assert not isinstance(points, str) and points
    assert all(p.terms >= MIN_ALLAN_TERMS for p in points)
    # 40 readings: m = 1, 2, 4, 8 give 39, 37, 33, 25 terms; m = 16 is not formed (> M/4)
    assert [p.m for p in points] == [1, 2, 4, 8]


def test_no_allan_alarm_and_no_trend_before_the_minimum(tmp_path: Path) -> None:
    spool = Spool(tmp_path / "spool").ensure()
    with SimServer(time_scale=0.0, noise=True) as sim:
        sim.bench.set_drift(rate_hz_per_s=3e6, jitter_hz=2e5)
        plan = soak_plan(tmp_path / "p.yaml", sim.tcp_resource, tmp_path / "out",
                         count=8, soak={"alarms": {"resonance_adev": "1 Hz"}})
        job = submit(spool, plan)
        assert SoakWorker(job, StopSignal()).run() == "finished"
    status = job.read_status()
    assert status["alarms"]["count"] == 0, status["alarms"]
    assert status["drift"]["allan_resonance"] == []
    assert status["drift"]["statistics"].startswith("not enough data (8 sweep(s)")
    report = write_report(job, tmp_path / "rep")
    assert "resonance trend (least-squares line): not enough data" in report.text
    assert "Allan deviation of the resonance: not enough data" in report.text
    assert "MHz/h" not in report.text


def test_allan_alarm_fires_once_there_is_enough_data(tmp_path: Path) -> None:
    spool = Spool(tmp_path / "spool").ensure()
    with SimServer(time_scale=0.0, noise=True) as sim:
        sim.bench.set_drift(rate_hz_per_s=3e6, jitter_hz=2e5)
        plan = soak_plan(tmp_path / "p.yaml", sim.tcp_resource, tmp_path / "out",
                         count=30, every="0.02 s",
                         soak={"alarms": {"resonance_adev": "1 Hz"},
                               "statistics": {"min_sweeps": 20, "min_span": "0.2 s"}})
        job = submit(spool, plan)
        assert SoakWorker(job, StopSignal()).run() == "finished"
    status = job.read_status()
    assert status["drift"]["statistics"] == "ready"
    assert status["alarms"]["count"] == 1
    assert status["alarms"]["last"]["seq"] >= 19  # never before the 20th sweep


def _texts(fig) -> list:
    found = list(fig.texts)
    for ax in fig.axes:
        found += [ax.title, ax.xaxis.label, ax.yaxis.label, *ax.texts]
        legend = ax.get_legend()
        if legend is not None:
            found += legend.get_texts()
    return [t for t in found if t.get_text()]


def test_drift_picture_thresholds_events_and_text() -> None:
    t = np.arange(0.0, 600.0, 10.0)
    shift = 1e3 * np.sin(t / 60.0)
    panels = [Panel("resonance shift (kHz)", shift / 1e3, 0.8, signed=True),
              Panel("worst in-band SWR", 1.2 + 0 * t, 1.5)]
    events = Events(alarms=[(120.0, "resonance shift")], faults=np.array([50.0, 300.0]),
                    restarts=np.array([400.0]), missed=np.array([310.0]),
                    held=[(200.0, 260.0)])
    fig = drift_figure(panels, t, events, "soak line-7: drift from the reference")
    FigureCanvasAgg(fig).draw()  # lays the figure out as saving it does
    shift_ax, swr_ax = fig.axes
    levels = sorted(line.get_ydata()[0] for line in shift_ax.get_lines()
                    if list(line.get_xdata()) == [0, 1])
    assert levels == [-0.8, 0.8]
    swr_levels = [line.get_ydata()[0] for line in swr_ax.get_lines()
                  if list(line.get_xdata()) == [0, 1]]
    assert swr_levels == [1.5]
    words = [t.get_text() for t in _texts(fig)]
    assert "resonance shift" in words  # the alarm in words, not 'resonance_shift_hz'
    assert not any("_hz" in w or "_db" in w for w in words)
    legend = " ".join(t.get_text() for t in swr_ax.get_legend().get_texts())
    assert "faults (2)" in legend and "restarts of the daemon (1)" in legend
    assert "missed sweeps (1)" in legend and "held for disk space (1)" in legend
    for ax in fig.axes:  # the hold is a hatched span on every panel, in its place
        spans = [p for p in ax.patches if p.get_hatch() == "//"]
        assert len(spans) == 1
        left, width = spans[0].get_x(), spans[0].get_width()
        assert (left, left + width) == pytest.approx((200.0 / 60, 260.0 / 60))
    box = fig.bbox
    for text in _texts(fig):
        extent = text.get_window_extent()
        assert box.x0 - 1 <= extent.x0 and extent.x1 <= box.x1 + 1, text.get_text()
        assert box.y0 - 1 <= extent.y0 and extent.y1 <= box.y1 + 1, text.get_text()


def test_held_spans_come_from_the_journalled_holds() -> None:
    """A closed hold spans its start to its end; one still on reaches the last sweep; a
    row with a broken time is left out rather than breaking the picture."""
    from acquire.soak.report import _held_spans
    from acquire.utc import parse_utc

    start = parse_utc("2026-12-03T08:00:00Z").timestamp()
    holds = [{"started_utc": "2026-12-03T08:10:00Z", "ended_utc": "2026-12-03T08:15:00Z"},
             {"started_utc": "2026-12-03T08:40:00Z", "ended_utc": None},
             {"started_utc": "not a time", "ended_utc": None}]
    t = np.array([0.0, 600.0, 3000.0])
    assert _held_spans(holds, start, t) == [(600.0, 900.0), (2400.0, 3000.0)]
    assert _held_spans(holds, 0.0, t) == []
