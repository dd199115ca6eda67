"""Station parts on their own: the station: section, serial checks, golden comparison
(scikit-rf as the outside oracle), the golden schedule, key figures, counters, display,
terminal input and held interrupts."""

from __future__ import annotations

import io
import os
import signal
import subprocess
import sys
from datetime import datetime, timedelta, timezone
from pathlib import Path

import numpy as np
import pytest
from test_station_support import GOLDEN, write_plan

from acquire.errors import PlanError
from acquire.journal import StoredFields, journal_in
from acquire.plan import load_plan
from acquire.station.config import station_config
from acquire.station.counters import count_yield
from acquire.station.display import banner, big
from acquire.station.errors import GoldenError, SerialRefused
from acquire.station.golden import GoldenSpec, Tolerance, compare, differences
from acquire.station.interrupts import deferred_interrupt
from acquire.station.schedule import line_state
from acquire.station.serials import SerialRule, check_serial
from acquire.station.terminal import MAX_LINE, Terminal
from acquire.sweep import Sweep
from acquire.utc import utc_text

RESOURCE = "TCPIP::127.0.0.1::5025::SOCKET"


def plan_with(tmp_path: Path, **changes):
    return load_plan(write_plan(tmp_path, RESOURCE, **changes))


# -- the station: section ------------------------------------------------------------------


def test_shipped_plan_parses(tmp_path: Path) -> None:
    config = station_config(load_plan(Path(GOLDEN).parent.parent / "patch-station.yaml"))
    assert config.station_id == "line-a-1"
    assert config.serial == SerialRule("PA-[0-9]{4}", 16)
    assert config.band_hz == (2.40e9, 2.50e9)
    golden = config.golden
    assert golden.serial == "GOLDEN" and golden.every_units == 25 and golden.every_s == 4 * 3600
    assert golden.tolerance == Tolerance(0.5, 5.0, None, -40.0)


def test_plan_without_station_section_gets_defaults(tmp_path: Path) -> None:
    plan = load_plan(Path(GOLDEN).parent.parent / "patch-line-a.yaml")
    config = station_config(plan)
    assert config.golden is None and config.station_id is None
    assert check_serial("AB-12_x.3", config.serial) == "AB-12_x.3"
    with pytest.raises(SerialRefused, match="does not match"):
        check_serial("-leading-dash", config.serial)


@pytest.mark.parametrize(("changes", "message"), [
    ({"station": {"golde": {}}}, r"station: unknown key 'golde' \(did you mean 'golden'\?\)"),
    ({"station": {"serial": {"pattern": "PA-[0-9"}}},
     r"station\.serial\.pattern: not a valid regular expression"),
    ({"station": {"serial": {"pattern": "[0-9]*"}}},
     r"station\.serial\.pattern: must not accept an empty serial"),
    ({"station": {"serial": {"pattern": "PA.*", "max_length": 0}}},
     r"station\.serial\.max_length: must be an integer from 1 to 128, got 0"),
    ({"station": {"band": ["2.2 GHz", "2.5 GHz"]}},
     r"station\.band: 2\.2 GHz\.\.2\.5 GHz is not inside the sweep 2\.3 GHz\.\.2\.6 GHz"),
    ({"station": {"band": ["2.5 GHz", "2.4 GHz"]}}, r"station\.band: low end 2\.5 GHz"),
    ({"station": {"id": "line a/1"}}, r"station\.id: station id must be 1-32 letters"),
    ({"station": {"golden": {"reference": "nowhere.s1p"}}},
     r"station\.golden\.reference: file not found: .*nowhere\.s1p"),
    ({"station": {"golden": {"serial": "../GOLD"}}}, r"station\.golden\.serial: holds a path"),
    ({"station": {"golden": {"tolerance": {"min_level": "-30 dB"}}}},
     r"station\.golden\.tolerance: give at least one of magnitude"),
    ({"station": {"golden": {"tolerance": {"phase": "5 rad"}}}},
     r"station\.golden\.tolerance\.phase: unknown angle unit 'rad'"),
    ({"station": {"golden": {"every_units": 0}}},
     r"station\.golden\.every_units: must be an integer from 1"),
    ({"stimulus": {"start": "2.3 GHz", "stop": "2.6 GHz", "points": 301, "power": "-10 dBm",
                   "if_bandwidth": "1 kHz"}},
     r"station\.golden\.reference: patch-station-golden\.s1p holds 601 points 2\.3 GHz\.\.2\.6 "
     r"GHz; the plan sweeps 301 points"),
])
def test_station_section_errors_name_the_key(tmp_path: Path, changes, message) -> None:
    with pytest.raises(PlanError, match=message) as info:
        station_config(plan_with(tmp_path, **changes))
    assert "\n" not in str(info.value)
    assert str(tmp_path / "plan.yaml") in str(info.value)


def test_a_station_needs_checks(tmp_path: Path) -> None:
    from acquire.station.errors import StationError
    from acquire.station.loop import Station

    with pytest.raises(StationError, match="has no checks; a station judges every unit"):
        Station(plan_with(tmp_path, checks=[]))


# -- serials ---------------------------------------------------------------------------------

RULE = SerialRule("PA-[0-9]{4}", 16)


@pytest.mark.parametrize(("raw", "reason"), [
    ("", "is empty"),
    ("   ", "is empty"),
    ("PA/0001", "holds a path separator '/'"),
    ("PA\\0001", "holds a path separator"),
    ("..", "holds '..'"),
    ("PA-..01", "holds '..'"),
    ("PA\x1b[0001", "control character 0x1b at position 3"),
    ("PA-00\x0001", "control character 0x00 at position 6"),
    ("PA-0001\x7f", "control character 0x7f at position 8"),
    ("PA-\udcff001", "byte 0xff at position 4, which is not UTF-8 text"),
    ("P" * 17, "is too long: 17 characters, at most 16"),
    ("PA-" + "9" * 4000, "is too long"),
    ("pa-0001", "does not match the pattern PA-[0-9]{4}"),
    ("PA-00011", "does not match"),
    ("PA-0001 X", "does not match"),
    ("GOLDEN", "does not match"),
])
def test_malformed_serials_are_refused_with_a_reason(raw: str, reason: str) -> None:
    with pytest.raises(SerialRefused) as info:
        check_serial(raw, RULE)
    text = str(info.value)
    assert reason in text
    assert text.isprintable() and text.isascii()  # escaped: nothing reaches the terminal raw


def test_scanner_line_ends_and_blanks_are_dropped() -> None:
    assert check_serial(" PA-0042\r", RULE) == "PA-0042"
    assert check_serial("\tPA-0042\r\n", RULE) == "PA-0042"


def test_even_a_permissive_pattern_keeps_path_tricks_out() -> None:
    anything = SerialRule(".+", 40)
    assert check_serial("A:B*?<>|", anything) == "A:B*?<>|"
    for bad in ("a/b", "..", "x\ny"):
        with pytest.raises(SerialRefused):
            check_serial(bad, anything)


# -- golden comparison ------------------------------------------------------------------------

F = np.linspace(2.3e9, 2.6e9, 301)


def antenna(f0: float = 2.45e9, r: float = 45.0, q: float = 12.0) -> np.ndarray:
    w = 2 * np.pi * F
    ind = q * r / (2 * np.pi * f0)
    cap = 1 / ((2 * np.pi * f0) ** 2 * ind)
    z = r + 1j * (w * ind - 1 / (w * cap))
    return (z - 50) / (z + 50)


def sweep(gamma: np.ndarray, f: np.ndarray = F) -> Sweep:
    return Sweep(f, gamma.reshape(-1, 1, 1))


def spec(tmp_path: Path, **tol):
    return GoldenSpec("GOLDEN", tmp_path / "ref.s1p", tolerance=Tolerance(**tol))


def test_differences_match_scikit_rf(tmp_path: Path) -> None:
    """Oracle: scikit-rf's s_db and s_deg (Touchstone-style dB and degrees)."""
    import skrf as rf
    ref, meas = antenna(), antenna(f0=2.452e9, r=47.0) * np.exp(-1j * 0.02)
    freq = rf.Frequency.from_f(F, unit="Hz")
    nref, nmeas = rf.Network(frequency=freq, s=ref, z0=50), rf.Network(frequency=freq, s=meas,
                                                                        z0=50)
    db, deg, vec, level = differences(meas, ref, -200.0)
    want_db = np.abs(nmeas.s_db[:, 0, 0] - nref.s_db[:, 0, 0])
    want_deg = np.abs((nmeas.s_deg[:, 0, 0] - nref.s_deg[:, 0, 0] + 180.0) % 360.0 - 180.0)
    assert level.all()
    np.testing.assert_allclose(db, want_db, rtol=0, atol=1e-9)
    np.testing.assert_allclose(deg, want_deg, rtol=0, atol=1e-9)
    np.testing.assert_allclose(vec, np.abs((nmeas - nref).s[:, 0, 0]), rtol=0, atol=1e-12)


def test_golden_pass_fail_and_the_worst_point(tmp_path: Path) -> None:
    ref = antenna()
    ok = compare(sweep(ref * 10 ** (0.1 / 20)), sweep(ref), spec(tmp_path), ("S11",))
    assert ok.passed and "within tolerance" in ok.message
    assert ok.magnitude_db.value == pytest.approx(0.1, abs=1e-9)
    moved = ref.copy()
    moved[150] *= 10 ** (0.8 / 20) * np.exp(1j * np.deg2rad(2.0))
    bad = compare(sweep(moved), sweep(ref), spec(tmp_path), ("S11",))
    assert not bad.passed
    assert bad.magnitude_db.freq_hz == F[150] and bad.magnitude_db.value == pytest.approx(0.8)
    assert bad.phase_deg.value == pytest.approx(2.0)
    assert "OUT OF TOLERANCE" in bad.message and "magnitude 0.8 dB at S11 2.45 GHz" in bad.message
    assert "phase" not in bad.message  # 2 deg is within the 5 deg allowed


def test_magnitude_and_phase_skip_points_below_min_level(tmp_path: Path) -> None:
    """Near a deep match a tiny vector change is a large dB change; only |dS| judges there."""
    ref = antenna(r=50.0)  # |S11| -> 0 at 2.45 GHz
    assert np.abs(ref).min() < 1e-12
    meas = ref + 0.001  # a small vector error everywhere
    loose = compare(sweep(meas), sweep(ref), spec(tmp_path, min_level_db=-30.0), ("S11",))
    assert loose.passed, loose.message
    worst_at = int(np.argmin(np.abs(F - loose.magnitude_db.freq_hz)))
    assert abs(ref[worst_at]) >= 10 ** (-30 / 20)
    strict = compare(sweep(meas), sweep(ref), spec(tmp_path, min_level_db=-200.0), ("S11",))
    assert not strict.passed
    vector = compare(sweep(meas), sweep(ref),
                     spec(tmp_path, magnitude_db=None, phase_deg=None, vector=0.0005), ("S11",))
    assert not vector.passed and vector.vector.value == pytest.approx(0.001)


def test_golden_band_and_grid(tmp_path: Path) -> None:
    ref = antenna()
    meas = ref.copy()
    meas[:20] *= 2.0  # outside 2.40..2.50 GHz only
    inside = GoldenSpec("GOLDEN", tmp_path / "r.s1p", band_hz=(2.4e9, 2.5e9))
    assert compare(sweep(meas), sweep(ref), inside, ("S11",)).passed
    assert not compare(sweep(meas), sweep(ref), spec(tmp_path), ("S11",)).passed
    with pytest.raises(GoldenError, match="different grids"):
        compare(sweep(ref[:-1], F[:-1]), sweep(ref), spec(tmp_path), ("S11",))
    nan = ref.copy()
    nan[3] = np.nan
    assert not compare(sweep(nan), sweep(ref), spec(tmp_path), ("S11",)).passed


# -- golden schedule ------------------------------------------------------------------------


def test_line_state_from_the_journal(tmp_path: Path) -> None:
    golden = GoldenSpec("GOLDEN", GOLDEN, every_units=2, every_s=3600.0)
    with journal_in(tmp_path) as j:
        run = j.start_run("station", "patch-station")
        state = line_state(j, "patch-station", golden)
        assert state.due and "no golden check on record" in state.due_reason
        j.record_golden(run, "GOLDEN", True)
        assert not line_state(j, "patch-station", golden).due
        for seq in range(2):
            p = j.plan_measurement(run, seq, tmp_path / f"u{seq}.s1p", serial=f"PA-{seq}")
            j.store_measurement(p, touchstone=p.touchstone, summary=None, raw_touchstone=None,
                                fields=StoredFields(verdict="pass"))
        state = line_state(j, "patch-station", golden)
        assert state.due and state.units_since == 2 and "2 units since" in state.due_reason
        later = datetime.now(timezone.utc) + timedelta(hours=2)
        j.record_golden(run, "GOLDEN", True)
        assert "since the last good golden check (every 1 h)" in line_state(
            j, "patch-station", golden, now=later).due_reason
        j.record_golden(run, "GOLDEN", False, message="moved")
        stopped = line_state(j, "patch-station", golden)
        assert stopped.stopped and "failed: moved" in stopped.stop_reason
        old_cal = datetime.now(timezone.utc) - timedelta(hours=1)
        assert line_state(j, "patch-station", golden, cal_created=old_cal).stopped
        new_cal = datetime.now(timezone.utc) + timedelta(seconds=1)
        released = line_state(j, "patch-station", golden, cal_created=new_cal)
        assert not released.stopped and not released.due
        assert released.anchor_utc == utc_text(new_cal)
        assert line_state(j, "other-plan", golden).due  # per plan


# -- key figures -------------------------------------------------------------------------------


def test_worst_swr_in_band_matches_scikit_rf(tmp_path: Path) -> None:
    """Oracle: scikit-rf ``Network.s_vswr`` (SWR = (1+|Γ|)/(1-|Γ|), Pozar ch. 2)."""
    import skrf as rf

    from acquire.checks import evaluate_checks
    from acquire.station.figures import key_figures

    plan = load_plan(Path(GOLDEN).parent.parent / "patch-station.yaml")
    gamma = antenna(f0=2.44e9, r=40.0, q=10.0)
    sw = sweep(gamma)
    verdict = evaluate_checks(list(plan.checks), sw)
    figures = key_figures(sw, verdict, plan, (2.40e9, 2.50e9))
    net = rf.Network(frequency=rf.Frequency.from_f(F, unit="Hz"), s=gamma, z0=50)
    inside = (F >= 2.40e9) & (F <= 2.50e9)
    vswr = net.s_vswr[:, 0, 0]
    assert figures.worst_swr == pytest.approx(vswr[inside].max(), rel=1e-12)
    assert figures.worst_swr_hz == F[inside][np.argmax(vswr[inside])]
    bw = next(r for r in verdict.results if r.kind == "bandwidth")
    assert figures.usable_bandwidth_hz == bw.details["measured_hz"]
    assert figures.usable_rule == "SWR <= 2"
    assert figures.resonance_hz == verdict.metrics["S11"]["resonance_hz"]
    mask = next(r for r in verdict.results if r.kind == "mask")
    assert figures.worst_margin == pytest.approx(mask.details["segments"][0]["worst"]["margin"])
    assert "mask patch-2g45 '2.4 GHz band'" in figures.worst_where


# -- counters, display, terminal, interrupts --------------------------------------------------


def test_yield_counters() -> None:
    rows = [
        {"serial": "A", "attempt": 1, "verdict": "pass"},
        {"serial": "B", "attempt": 1, "verdict": "fail"},
        {"serial": "B", "attempt": 2, "verdict": "pass"},  # reworked, passes
        {"serial": "C", "attempt": 1, "verdict": "error"},
        {"serial": "D", "attempt": 2, "verdict": "fail"},  # first attempt in another shift
        {"serial": "", "attempt": 1, "verdict": "pass"},
        {"serial": "", "attempt": 1, "verdict": "pass"},
    ]
    y = count_yield(rows)
    assert (y.tested, y.passed, y.failed, y.retests) == (6, 4, 2, 2)
    assert (y.first_tested, y.first_passed) == (5, 3)
    assert y.first_pass_yield == pytest.approx(0.6)
    assert y.line() == ("tested 6 | passed 4 | failed 2 | yield 66.7 % (6 judged) | "
                        "retests 2 | first-pass yield 60.0 %")
    assert count_yield([]).line().endswith("first-pass yield n/a")


def test_big_letters_are_readable_blocks() -> None:
    rows = big("PASS")
    assert len(rows) == 5 and all(set(r) <= {"#", " "} for r in rows)
    assert rows[0].startswith("########")
    assert big("FAIL") != big("PASS")
    painted = banner("fail", lambda text, color: f"<{color}>{text}")
    assert painted[1].startswith("<red+bold>")
    term = Terminal(io.BytesIO(), io.StringIO(), color=True)
    assert term.paint("PASS", "green+bold") == "\x1b[32;1mPASS\x1b[0m"
    assert Terminal(io.BytesIO(), io.StringIO(), color=False).paint("x", "red") == "x"


def test_terminal_reads_raw_lines() -> None:
    data = b"PA-0001\r\n\xffbad\n" + b"9" * (MAX_LINE + 50) + b"\nnext\n"
    out = io.StringIO()
    term = Terminal(io.BytesIO(data), out, color=False)
    assert term.ask("serial> ") == "PA-0001"
    assert term.ask("serial> ") == "\udcffbad"
    long = term.ask("serial> ")
    assert len(long) > MAX_LINE
    assert term.ask("serial> ") == "next"  # the over-long line was read to its end
    assert term.ask("serial> ") is None
    assert out.getvalue().count("serial> ") == 5


def test_command_modules_import_light() -> None:
    """``sweepd --help`` stays fast: the command modules import nothing heavy."""
    code = ("import sys, acquire.cli, acquire.commands.station, acquire.commands.measure, "
            "acquire.commands.summary; "
            "heavy = {'numpy', 'matplotlib', 'yaml', 'pyvisa'} & set(sys.modules); "
            "assert not heavy, heavy")
    subprocess.run([sys.executable, "-c", code], check=True)


def test_interrupt_is_held_until_the_block_ends() -> None:
    done = []
    with pytest.raises(KeyboardInterrupt), deferred_interrupt():
        os.kill(os.getpid(), signal.SIGINT)
        done.append("files written")
        done.append("journal marked stored")
    assert done == ["files written", "journal marked stored"]
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler
