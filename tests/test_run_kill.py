"""Kill tests for ``sweepd run`` and ``sweepd measure``: real processes killed with SIGKILL
mid-sweep and between journalling a capture as pending and storing it. Every later start
settles what they left (as station and soak do): their runs end ``crashed``, their pending
rows become ``interrupted`` (files written ahead are removed) or are adopted when complete,
and a run whose process is still alive is never touched."""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest
from test_station_support import GOOD, install_cal, rows, write_plan

from simulators.server import SimServer

PENDING_THEN_DIE = textwrap.dedent("""
    import os, signal, sys, time
    from pathlib import Path
    from acquire.journal import journal_in
    from acquire.journal.owner import RunOwner
    out, how = Path(sys.argv[1]), sys.argv[2]
    journal = journal_in(out)
    owner = RunOwner(out)
    run = journal.start_run("run", "patch-station", **owner.fields())
    planned = journal.plan_measurement(run, 0, out / "unit-PA-0009.s1p", serial="PA-0009")
    (out / "unit-PA-0009.json").write_text("{}")  # written ahead of the Touchstone file
    print(run, flush=True)
    if how == "die":
        os.kill(os.getpid(), signal.SIGKILL)
    time.sleep(60)  # alive, holding its run
""")


@pytest.fixture
def sim():
    with SimServer(time_scale=0.0, noise=False) as server:
        yield server


def sweepd(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "acquire.cli", *args], capture_output=True,
                          text=True, timeout=60)


def until_free(*args: str) -> subprocess.CompletedProcess:
    """Run a command, again while the simulator still serves the killed client (it takes
    the next client when the stalled sweep is over); bounded."""
    deadline = time.monotonic() + 30
    while True:
        done = sweepd(*args)
        if "Device busy" not in done.stderr or time.monotonic() > deadline:
            return done
        time.sleep(0.2)


def start(*args: str) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "acquire.cli", *args],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)


def wait_for_run(out: Path, count: int) -> None:
    deadline = time.monotonic() + 20
    while time.monotonic() < deadline:
        try:
            if len(rows(out, "SELECT id FROM runs WHERE state = 'running'")) >= count:
                return
        except sqlite3.Error:  # not created yet
            pass
        time.sleep(0.02)
    raise AssertionError("the killed process never journalled its run")


def pending_process(out: Path, how: str) -> tuple[subprocess.Popen, int]:
    out.mkdir(parents=True, exist_ok=True)
    proc = subprocess.Popen([sys.executable, "-c", PENDING_THEN_DIE, str(out), how],
                            stdout=subprocess.PIPE, text=True)
    run = int(proc.stdout.readline())
    proc.stdout.close()
    return proc, run


@pytest.mark.parametrize("command", ["run", "measure"])
def test_a_command_killed_mid_sweep_is_settled_by_the_next_start(sim, tmp_path, command):
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
    sim.faults.arm("stall", seconds=1.5)
    sim.bench.select_unit(GOOD[0])
    proc = start(command, str(plan), "--serial", GOOD[0])
    wait_for_run(out, 1)
    time.sleep(0.3)  # inside the sweep, which stalls
    proc.send_signal(signal.SIGKILL)
    assert proc.wait(10) == -signal.SIGKILL
    assert [r["state"] for r in rows(out, "SELECT state FROM runs")] == ["running"]
    done = until_free(command, str(plan), "--serial", GOOD[1])
    assert done.returncode == 0, done.stderr
    runs = rows(out, "SELECT kind, state, note FROM runs ORDER BY id")
    assert [(r["kind"], r["state"]) for r in runs] == [(command, "crashed"),
                                                       (command, "finished")]
    assert "settled at a later start" in runs[0]["note"]
    assert not rows(out, "SELECT id FROM measurements WHERE state = 'pending'")


@pytest.mark.parametrize("command", ["run", "measure"])
def test_a_pending_row_of_a_killed_process_is_settled_and_a_live_one_is_not(
        sim, tmp_path, command):
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
    dead, dead_run = pending_process(out, "die")
    assert dead.wait(10) == -signal.SIGKILL
    live, live_run = pending_process(tmp_path / "out", "live")
    try:
        sim.bench.select_unit(GOOD[0])
        done = sweepd(command, str(plan), "--serial", GOOD[0])
        assert done.returncode == 0, done.stderr
        states = {r["id"]: r["state"] for r in rows(out, "SELECT id, state FROM runs")}
        assert states[dead_run] == "crashed" and states[live_run] == "running"
        by_run = {r["run_id"]: r["state"] for r in rows(
            out, "SELECT run_id, state FROM measurements WHERE serial = 'PA-0009'")}
        assert by_run == {dead_run: "interrupted", live_run: "pending"}
    finally:
        live.kill()
        live.wait(10)
    # the live one is dead now: the next start settles it too
    sim.bench.select_unit(GOOD[1])
    assert sweepd(command, str(plan), "--serial", GOOD[1]).returncode == 0
    assert not rows(out, "SELECT id FROM measurements WHERE state = 'pending'")
    assert not rows(out, "SELECT id FROM runs WHERE state = 'running'")
    assert not (out / "unit-PA-0009.json").exists()  # the orphan written ahead is gone
    assert not list((out / ".sweepd-locks").iterdir())
    summary = sweepd("summary", str(out))
    assert "4 measurements (2 interrupted, 2 stored)" in summary.stdout


def test_a_complete_capture_of_a_killed_run_is_adopted(sim, tmp_path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
    proc, run = pending_process(out, "live")
    (out / "unit-PA-0009.s1p").write_text("! complete (written atomically)\n")
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait(10)
    sim.bench.select_unit(GOOD[0])
    assert sweepd("run", str(plan), "--serial", GOOD[0]).returncode == 0
    (row,) = rows(out, "SELECT state, note FROM measurements WHERE run_id = ?", (run,))
    assert row["state"] == "stored" and "adopted" in row["note"]
