"""``sweepd station`` end to end: a real subprocess driven through its terminal interface
(a pipe, or a pseudo-terminal) talking to the simulator over TCP or a serial line.

Verdicts are checked against the simulated lot; corrected data against the simulator's
ground truth; journal rows against the files on disk.
"""

from __future__ import annotations

import json
import os
import signal
import time
from pathlib import Path

import numpy as np
import pytest
from station_driver import StationProcess
from test_station_support import BAD, GOOD, captures, install_cal, rows, write_plan

from acquire.journal import journal_in
from acquire.storage import sweep_stale_temps
from simulators.server import SimServer


@pytest.fixture
def sim():
    with SimServer(serial=True, time_scale=0.0, noise=False) as server:
        yield server


def start(plan: Path, *extra: str, pty: bool = False, env: dict | None = None
          ) -> StationProcess:
    return StationProcess([str(plan), "--station", "bench-7", *extra], pty=pty, env=env).start()


def golden_ok(st: StationProcess, sim: SimServer) -> str:
    before = st.expect("golden> ")
    assert "GOLDEN CHECK (start of the shift)" in before
    sim.bench.select_unit("GOLDEN")
    st.send("")
    text = st.expect("serial> ")
    assert "GOLDEN CHECK PASSED" in text, text
    return before + text


def unit(st: StationProcess, sim: SimServer, serial: str, prompt: str = "serial> ") -> str:
    sim.bench.select_unit(serial)
    st.send(serial)
    return st.expect(prompt)


def agree(out: Path) -> list:
    """Journal and folder agree: every stored row's files exist, every capture is stored."""
    stored = rows(out, "SELECT touchstone, summary FROM measurements WHERE state = 'stored'")
    for row in stored:
        assert Path(row["touchstone"]).is_file() and Path(row["summary"]).is_file()
    assert {Path(r["touchstone"]) for r in stored} == captures(out)
    assert not list(out.glob(".tmp-*"))
    assert not rows(out, "SELECT id FROM measurements WHERE state = 'pending'")
    return stored


def test_a_batch_over_tcp_gets_the_right_verdicts_files_and_journal(sim, tmp_path) -> None:
    out = tmp_path / "out"
    cal = install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource)
    with start(plan, "--operator", "Ana", "--lot", "LOT-2026-49") as st:
        intro = golden_ok(st, sim)
        assert "CAUTION: never connect the test port to a line that carries" in intro
        assert "CAUTION: ESD" in intro
        assert f"calibration {cal.stem}" in intro and "valid for" in intro
        for serial in (*GOOD[:2], *BAD[:2]):
            text = unit(st, sim, serial)
            want = "PASS" if serial in GOOD else "FAIL"
            assert f"{serial}: {want}" in text and "worst margin" in text
            assert "resonance" in text and "usable bandwidth" in text
            assert "worst SWR in 2.4 GHz..2.5 GHz" in text
        text = unit(st, sim, BAD[0])
        assert f"RETEST: {BAD[0]} was measured 1 time(s) before" in text
        assert f"{BAD[0]}: FAIL   RETEST (attempt 2)" in text
        assert ("tested 4 | passed 2 | failed 2 | yield 50.0 % (4 judged) | retests 1 | "
                "first-pass yield 50.0 %") in text
        st.send("s")
        assert "retests 1" in st.expect("serial> ")
        st.send("q")
        assert st.wait() == 0
    run = rows(out, "SELECT * FROM runs")[0]
    assert (run["kind"], run["station"], run["operator"], run["lot"], run["state"]) == (
        "station", "bench-7", "Ana", "LOT-2026-49", "finished")
    assert run["instrument"] == "sweepd-sim,generic-2port,SIM0001,1.0"
    got = rows(out, "SELECT serial, attempt, golden, verdict, cal_id, summary FROM measurements "
                    "ORDER BY id")
    assert [(r["serial"], r["attempt"], r["golden"], r["verdict"]) for r in got] == [
        ("GOLDEN", 1, 1, "pass"), (GOOD[0], 1, 0, "pass"), (GOOD[1], 1, 0, "pass"),
        (BAD[0], 1, 0, "fail"), (BAD[1], 1, 0, "fail"), (BAD[0], 2, 0, "fail")]
    assert {r["cal_id"] for r in got} == {cal.stem}
    for r in got:
        summary = json.loads(Path(r["summary"]).read_text())
        assert summary["verdict"] == r["verdict"]
        assert summary["metrics"]["key_figures"]["worst_swr_in_band"] is not None
    stored = agree(out)
    assert len({Path(r["touchstone"]) for r in stored}) == 6  # the retest kept its own file
    golden = rows(out, "SELECT passed, worst_db, touchstone FROM golden_checks")
    assert [g["passed"] for g in golden] == [1] and golden[0]["worst_db"] < 1e-6


def test_corrected_data_in_the_file_is_the_units_truth(sim, tmp_path) -> None:
    """Outside reference: the simulator's ground truth of the unit on the fixture."""
    from acquire.touchstone import read_touchstone

    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource)
    with start(plan) as st:
        golden_ok(st, sim)
        unit(st, sim, GOOD[2])
        st.send("q")
        assert st.wait() == 0
    path = Path(rows(out, "SELECT touchstone FROM measurements WHERE golden = 0")[0][0])
    assert GOOD[2] in path.name and path.parent == out and path.name.endswith("-pass.s1p")
    sweep = read_touchstone(path).to_sweep()
    np.testing.assert_allclose(sweep.param("S11"), sim.bench.truth(sweep.freq_hz)[:, 0, 0],
                               atol=1e-9)


MALFORMED = [
    (b"", "is empty"),
    (b"PA/0001", "holds a path separator '/'"),
    (b"..", "holds '..'"),
    (b"../../etc/passwd", "holds a path separator"),
    (b"PA-0001\x1b[2J", "control character 0x1b"),
    (b"PA-\xff001", "byte 0xff at position 4"),
    (b"PA-" + b"9" * 5000, "is too long"),
    (b"pa-0001", "does not match the pattern PA-[0-9]{4}"),
]


def test_station_id_is_asked_and_malformed_serials_are_refused(sim, tmp_path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None, "id": None})
    with StationProcess([str(plan)]) as st:  # no --station and no station.id: asked
        st.expect("station id> ")
        st.send("bench 9/x")
        assert "REFUSED: station id must be 1-32 letters" in st.expect("station id> ")
        st.send("bench-9")
        st.expect("serial> ")
        for raw, reason in MALFORMED:
            st.send(raw)
            text = st.expect("serial> ")
            assert "REFUSED: serial" in text and reason in text, (raw[:20], text)
            assert "measuring" not in text and "\x1b[2J" not in text
        st.close_input()  # end of input ends the shift
        assert st.wait() == 0
    assert not rows(out, "SELECT id FROM measurements")
    assert rows(out, "SELECT station, state FROM runs")[0][:] == ("bench-9", "finished")
    assert not captures(out)
    assert not [p for p in tmp_path.rglob("*") if p.name.endswith((".s1p", ".json"))]


def test_a_pseudo_terminal_over_the_serial_line(sim, tmp_path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.serial_resource)
    env = dict(os.environ, TERM="xterm")
    env.pop("NO_COLOR", None)
    with start(plan, pty=True, env=env) as st:
        golden_ok(st, sim)
        assert f"{GOOD[0]}: PASS" in unit(st, sim, GOOD[0])
        assert f"{BAD[2]}: FAIL" in unit(st, sim, BAD[2])
        text = unit(st, sim, "PA-1/2")
        assert "REFUSED: serial 'PA-1/2' holds a path separator" in text
        assert b"\x1b[32;1m" in st.raw and b"\x1b[31;1m" in st.raw  # green PASS, red FAIL
        st.close_input()  # Ctrl-D
        assert st.wait() == 0
    got = rows(out, "SELECT serial, verdict FROM measurements WHERE golden = 0 ORDER BY id")
    assert [tuple(r) for r in got] == [(GOOD[0], "pass"), (BAD[2], "fail")]
    assert rows(out, "SELECT resource FROM runs")[0][0] == sim.serial_resource
    agree(out)


def test_an_expired_cal_set_blocks_measuring_until_the_procedure_runs(sim, tmp_path) -> None:
    out = tmp_path / "out"
    install_cal(out, age_s=9 * 3600)
    plan = write_plan(tmp_path, sim.tcp_resource)
    with start(plan) as st:
        text = st.expect("cal> ")
        assert "CANNOT MEASURE: calibration" in text and "old (max 8 h)" in text
        assert "c = run the calibration procedure now" in text
        st.send(GOOD[0])
        assert "REFUSED" in st.expect("cal> ")
        st.send("c")
        text = golden_ok(st, sim)
        assert "Cal set" in text and "saved" in text
        assert f"{GOOD[0]}: PASS" in unit(st, sim, GOOD[0])
        st.send("q")
        assert st.wait() == 0
    cal_ids = {r[0] for r in rows(out, "SELECT cal_id FROM measurements")}
    fresh = sorted((out / "cal").glob("*.calset"))[-1].stem
    assert cal_ids == {fresh}


def test_a_cal_set_expiring_mid_shift_blocks_the_next_unit(sim, tmp_path) -> None:
    out = tmp_path / "out"
    install_cal(out, age_s=8 * 3600 - 600.0)  # valid for ten more minutes
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
    with StationProcess([str(plan), "--station", "bench-7"],
                        clock_shift_file=tmp_path / "clock-shift") as st:
        st.expect("serial> ")
        assert f"{GOOD[0]}: PASS" in unit(st, sim, GOOD[0])
        st.shift_clock(1200.0)  # twenty minutes later, by the station's injected clock
        text = unit(st, sim, GOOD[1], "cal> ")
        assert "CANNOT MEASURE: calibration" in text and "old (max 8 h)" in text
        assert "measuring" not in text
        st.send("q")
        assert st.wait() == 0
    assert [r[0] for r in rows(out, "SELECT serial FROM measurements")] == [GOOD[0]]


def test_a_mismatched_cal_set_is_refused(sim, tmp_path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    stimulus = {"start": "2.30 GHz", "stop": "2.60 GHz", "points": 601, "power": "-5 dBm",
                "if_bandwidth": "1 kHz"}
    plan = write_plan(tmp_path, sim.tcp_resource, stimulus=stimulus)
    with start(plan) as st:
        text = st.expect("cal> ")
        assert "source power -10 dBm; this sweep uses -5 dBm" in text
        st.send("q")
        assert st.wait() == 0
    assert not rows(out, "SELECT id FROM measurements")


def test_a_disturbed_golden_unit_stops_the_line(sim, tmp_path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": {"every_units": 2}})
    with start(plan) as st:
        golden_ok(st, sim)
        unit(st, sim, GOOD[0])
        text = unit(st, sim, GOOD[1], "golden> ")
        assert "GOLDEN CHECK (2 units since the last good golden check (every 2))" in text
        sim.bench.disturb()  # the fixture moved
        sim.bench.select_unit("GOLDEN")
        st.send("")
        text = st.expect("stopped> ")
        assert "LINE STOPPED: golden unit GOLDEN is OUT OF TOLERANCE" in text
        assert "fixture or test cable has moved" in text
        st.send(GOOD[2])
        assert "REFUSED" in st.expect("stopped> ")
        sim.bench.restore()
        st.send("g")
        st.expect("golden> ")
        st.send("")
        assert "GOLDEN CHECK PASSED" in st.expect("serial> ")
        assert f"{GOOD[2]}: PASS" in unit(st, sim, GOOD[2])
        # moved again: this time a recalibration at the new position releases the line
        sim.bench.disturb()
        st.send("g")
        st.expect("golden> ")
        st.send("")
        st.expect("stopped> ")
        st.send("c")
        text = st.expect("serial> ")
        assert "Cal set" in text and "saved" in text
        st.send("q")
        assert st.wait() == 0
    got = [r["passed"] for r in rows(out, "SELECT passed FROM golden_checks ORDER BY id")]
    assert got == [1, 0, 1, 0]
    faults = rows(out, "SELECT kind, action FROM faults")
    assert [tuple(f) for f in faults] == [("GoldenCheckFailed", "line stopped")] * 2
    serials = [r[0] for r in rows(out, "SELECT serial FROM measurements WHERE golden = 0")]
    assert serials == [GOOD[0], GOOD[1], GOOD[2]]  # nothing measured while stopped


def test_an_instrument_fault_loses_only_the_unit_in_flight(sim, tmp_path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
    with start(plan) as st:
        st.expect("serial> ")
        unit(st, sim, GOOD[0])
        sim.faults.arm("drop")
        text = unit(st, sim, GOOD[1])
        assert "INSTRUMENT FAULT" in text and f"{GOOD[1]} was NOT measured" in text
        assert "instrument sweepd-sim" in text  # reconnected
        assert f"{GOOD[1]}: PASS" in unit(st, sim, GOOD[1])
        st.send("q")
        assert st.wait() == 0
    got = rows(out, "SELECT serial, state, attempt FROM measurements ORDER BY id")
    assert [tuple(r) for r in got] == [(GOOD[0], "stored", 1), (GOOD[1], "missed", 1),
                                       (GOOD[1], "stored", 1)]
    assert rows(out, "SELECT kind FROM faults")[0][0] in ("ConnectionLost", "InstrumentTimeout")
    agree(out)


def test_ctrl_c_mid_sweep_keeps_everything_saved(sim, tmp_path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
    with start(plan) as st:
        st.expect("serial> ")
        unit(st, sim, GOOD[0])
        unit(st, sim, BAD[0])
        sim.faults.arm("stall", seconds=30.0)
        sim.bench.select_unit(GOOD[1])
        st.send(GOOD[1])
        st.until(f"measuring {GOOD[1]} ...")
        time.sleep(0.3)  # the sweep's data reply is stalled: the station is mid-sweep
        st.signal(signal.SIGINT)
        assert st.wait() == 130
        assert f"{GOOD[1]} was NOT measured (interrupted during the sweep)" in st.transcript
    got = rows(out, "SELECT serial, state FROM measurements ORDER BY id")
    assert [tuple(r) for r in got] == [(GOOD[0], "stored"), (BAD[0], "stored"),
                                       (GOOD[1], "missed")]
    assert rows(out, "SELECT state FROM runs")[0][0] == "stopped"
    assert len(agree(out)) == 2


def test_sigkill_between_units_and_mid_sweep(sim, tmp_path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource)
    with start(plan) as st:  # killed at the prompt, between units
        golden_ok(st, sim)
        unit(st, sim, GOOD[0])
        unit(st, sim, BAD[0])
        st.signal(signal.SIGKILL)
        assert st.wait() == -signal.SIGKILL
    assert len(agree(out)) == 3
    assert rows(out, "SELECT state FROM runs")[0][0] == "running"
    with start(plan) as st:  # the next shift closes the dead one, then is killed mid-sweep
        text = golden_ok(st, sim)
        assert "1 earlier run(s) ended without closing" in text
        unit(st, sim, GOOD[1])
        sim.faults.arm("stall", seconds=30.0)
        sim.bench.select_unit(GOOD[2])
        st.send(GOOD[2])
        st.until(f"measuring {GOOD[2]} ...")
        time.sleep(0.3)
        st.signal(signal.SIGKILL)
        assert st.wait() == -signal.SIGKILL
    with journal_in(out) as journal:
        assert journal.reconcile() == []  # nothing was left half-recorded
    stored = agree(out)
    assert len(stored) == 5  # 2 golden checks, 3 units; the unit in flight has no file
    assert [r[0] for r in rows(out, "SELECT state FROM runs ORDER BY id")] == ["crashed",
                                                                               "running"]


@pytest.mark.long
def test_sigkill_at_random_moments_never_tears_a_record(sim, tmp_path) -> None:
    """Kill the station at random points of a run of units, many times; after each kill
    the journal (once reconciled) and the folder must agree."""
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
    rng = np.random.default_rng(5)
    n = 0
    for _ in range(12):
        with start(plan) as st:
            st.expect("serial> ")
            for _ in range(50):  # type ahead: the station reads one serial per unit
                n += 1
                st.send(f"PA-{n % 10000:04d}")
            time.sleep(float(rng.uniform(0.05, 1.5)))
            st.signal(signal.SIGKILL)
            st.wait()
        with journal_in(out) as journal:
            journal.reconcile()
        # what the next start does: temp files of the killed writer go (never a live one's)
        sweep_stale_temps(out)
        agree(out)
