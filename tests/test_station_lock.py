"""One station per output folder, enforced by an OS file lock held for the life of the
station process: a second station on the same folder is refused with one line naming the
holder (pid, host, since) and exit 2, and touches nothing; the lock goes with the holder,
however it ends. Two real processes against the simulator."""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
from pathlib import Path

import pytest
from station_driver import StationProcess
from test_station_support import install_cal, rows, write_plan

from simulators.server import SimServer


@pytest.fixture
def sim():
    with SimServer(time_scale=0.0, noise=False) as server:
        yield server


def second_station(plan: Path, station: str = "bench-8") -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "acquire.cli", "station", str(plan),
                           "--station", station], stdin=subprocess.DEVNULL,
                          capture_output=True, text=True, timeout=60)


def test_a_second_station_on_the_same_folder_is_refused_and_names_the_holder(
        sim, tmp_path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
    with StationProcess([str(plan), "--station", "bench-7"]).start() as first:
        first.expect("serial> ")
        before = [tuple(r) for r in rows(out, "SELECT id, state FROM runs")]
        refused = second_station(plan)
        assert refused.returncode == 2
        line = refused.stderr.strip()
        assert "\n" not in line and refused.stdout == ""
        assert "another station is running there" in line
        assert f"station bench-7, pid {first.proc.pid} on {socket.gethostname()} since 20" \
            in line
        # the first station's live shift is untouched: same runs, still running
        assert [tuple(r) for r in rows(out, "SELECT id, state FROM runs")] == before
        assert before[-1][1] == "running"
        first.send("q")
        assert first.wait() == 0
    again = second_station(plan)  # the first one ended: the folder is free
    assert again.returncode == 0, again.stderr
    assert [r[0] for r in rows(out, "SELECT state FROM runs")] == ["finished", "finished"]


def test_a_killed_station_does_not_block_the_next_one(sim, tmp_path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
    first = StationProcess([str(plan), "--station", "bench-7"]).start()
    try:
        first.expect("serial> ")
        os.kill(first.proc.pid, signal.SIGKILL)
        first.wait()
    finally:
        first.close()
    again = second_station(plan)
    assert again.returncode == 0, again.stderr
    assert "1 earlier run(s) ended without closing" in again.stdout
    assert [r[0] for r in rows(out, "SELECT state FROM runs")] == ["crashed", "finished"]


def test_a_station_on_another_folder_runs_beside_it(sim, tmp_path) -> None:
    install_cal(tmp_path / "out")
    install_cal(tmp_path / "other")
    plan = write_plan(tmp_path, sim.tcp_resource, station={"golden": None})
    with StationProcess([str(plan), "--station", "bench-7"]).start() as first:
        first.expect("serial> ")
        beside = subprocess.run([sys.executable, "-m", "acquire.cli", "station", str(plan),
                                 "--station", "bench-8", "--output", str(tmp_path / "other")],
                                stdin=subprocess.DEVNULL, capture_output=True, text=True,
                                timeout=60)
        assert "another station" not in beside.stderr
        first.send("q")
        assert first.wait() == 0
