"""The real daemon in a child process: submit, status, cancel and report from "another
shell", SIGTERM and SIGKILL at random moments, jobs side by side, a private spool."""

from __future__ import annotations

import os
import random
import signal
import stat
import subprocess
import sys
import time
from pathlib import Path

import pytest
from schema_support import validate
from test_soak_support import check_invariants, journal_rows, soak_plan, status_counts

from acquire.cli import main
from acquire.soak.spool import Spool
from simulators.server import SimServer

HERE = Path(__file__).resolve().parents[1]


_SPAWNED: list[subprocess.Popen] = []


@pytest.fixture(autouse=True)
def _no_daemon_outlives_its_test():
    """A failing test must not leave a daemon running into the next one."""
    yield
    while _SPAWNED:
        proc = _SPAWNED.pop()
        if proc.poll() is None:
            proc.kill()
        proc.wait(timeout=10)


def serve(spool: Path, log: Path, *extra: str) -> subprocess.Popen:
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    with open(log, "ab") as err:
        proc = subprocess.Popen([sys.executable, "-m", "acquire.cli", "serve", "--spool",
                                 str(spool), *extra], stdout=subprocess.DEVNULL, stderr=err,
                                cwd=HERE, env=env)
    _SPAWNED.append(proc)
    return proc


def cli(capsys: pytest.CaptureFixture, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def wait_for(predicate, timeout: float = 10.0, what: str = "condition") -> None:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if predicate():
            return
        time.sleep(0.02)
    raise AssertionError(f"timed out waiting for {what}")


def worker_pid(spool: Spool, job_id: str) -> int | None:
    return spool.find(job_id).read_state().get("pid")


def test_submit_serve_status_report_from_other_shells(tmp_path: Path,
                                                      capsys: pytest.CaptureFixture) -> None:
    spool = tmp_path / "spool"
    with SimServer(time_scale=0.0, noise=True) as sim:
        sim.bench.set_drift(rate_hz_per_s=3e5)
        sim.faults.schedule(at=[[8, "drop"], [16, "error"]])
        plan = soak_plan(tmp_path / "p.yaml", sim.tcp_resource, tmp_path / "out",
                         every="0.03 s", count=60,
                         soak={"alarms": {"resonance_shift": "1 MHz", "command":
                                          f"{sys.executable} -c pass"},
                               "statistics": {"min_sweeps": 20, "min_span": "0.5 s"}})
        code, out, err = cli(capsys, "submit", str(plan), "--spool", str(spool))
        assert code == 0 and out.startswith("submitted soak-test-001: soak-test on TCPIP::")
        assert "no sweepd serve runs on spool" in err
        code, out, _ = cli(capsys, "status", "--spool", str(spool))
        assert "soak-test-001" in out and "waiting for sweepd serve" in out
        proc = serve(spool, tmp_path / "serve.log", "--until-idle")
        wait_for(lambda: Spool(spool).daemon_pid() == proc.pid, what="the daemon's lock")
        # a second daemon on the same spool is refused with one line
        code, _, err = cli(capsys, "serve", "--spool", str(spool))
        assert code == 2 and err.count("\n") == 1
        assert f"another sweepd serve (pid {proc.pid}) is already running" in err
        assert proc.wait(30) == 0
    code, out, _ = cli(capsys, "status", "--json", "--spool", str(spool))
    view = validate(out, "status")
    assert view["daemon"] == {"running": False, "pid": None}
    job = view["jobs"][0]
    assert job["state"] == "finished" and job["sweeps"]["planned"] == 60
    states = check_invariants(Spool(spool).find("soak-test-001"), 60)
    assert job["sweeps"]["done"] == states["stored"] + states["measured"]
    assert job["alarms"]["count"] >= 1 and job["drift"]["allan_resonance"]
    assert {f["kind"] for f in journal_rows(Spool(spool).find("soak"))[2]} >= {
        "connection-lost", "scpi-error"}
    log = (tmp_path / "serve.log").read_text()
    assert all(" INFO " in line or " WARNING " in line for line in log.splitlines()), log
    code, out, _ = cli(capsys, "report", "soak", "--spool", str(spool), "-o",
                       str(tmp_path / "rep"))
    assert code == 0 and "Soak report soak-test-001" in out
    for name in ("drift.png", "allan.png", "deviation.png", "summary.txt", "summary.html"):
        assert (tmp_path / "rep" / name).stat().st_size > 500, name
    assert "ALARM" in log and "resonance shift" in (tmp_path / "rep" / "summary.txt").read_text()
    code, out, _ = cli(capsys, "report", "soak", "--spool", str(spool), "-o",
                       str(tmp_path / "rep2"), "--json")
    report = validate(out, "report")
    assert code == 0 and Path(report["html"]).is_file() and set(report["pictures"]) == {
        "drift", "allan", "deviation"}
    code, _, err = cli(capsys, "report", "nothing-like-it", "--spool", str(spool))
    assert code == 2 and "no job 'nothing-like-it'" in err


def test_sigterm_finishes_the_sweep_records_the_stop_and_resumes(tmp_path: Path) -> None:
    spool = tmp_path / "spool"
    with SimServer(time_scale=0.0) as sim:
        plan = soak_plan(tmp_path / "p.yaml", sim.tcp_resource, tmp_path / "out",
                         every="0.05 s", count=80)
        assert main(["submit", str(plan), "--spool", str(spool)]) == 0
        proc = serve(spool, tmp_path / "serve.log")
        job = Spool(spool).find("soak-test-001")
        wait_for(lambda: (job.read_status().get("sweeps") or {}).get("done", 0) >= 5,
                 what="five sweeps")
        proc.send_signal(signal.SIGTERM)
        assert proc.wait(20) == 0
        _, rows, faults = journal_rows(job)
        assert faults[-1]["kind"] == "stop" and "SIGTERM" in faults[-1]["message"]
        assert job.read_state()["state"] == "running"
        assert not [r for r in rows if r["state"] == "pending"]
        proc = serve(spool, tmp_path / "serve.log", "--until-idle")
        assert proc.wait(30) == 0
    check_invariants(job, 80)
    kinds = [f["kind"] for f in journal_rows(job)[2]]
    assert kinds.count("stop") == 1 and kinds.count("restart") == 1


def sweeps_done(job) -> int:
    """Sweeps taken so far (stored or measured), read from the journal as a reader."""
    if not (job.output_dir / "journal.sqlite").is_file():
        return 0
    _, rows, _ = journal_rows(job)
    return sum(r["state"] in ("stored", "measured") for r in rows)


def kill_test(tmp_path: Path, kills: int, every: str, serial: bool) -> None:
    """SIGKILL the daemon ``kills`` times at random moments of its sweep loop, each time
    after its worker has taken at least one more sweep, then cancel the job from another
    shell while a last daemon runs, and check that everything is consistent.

    Nothing here depends on how fast the machine is: the schedule is far longer than the
    test (so slots missed while a daemon starts up on a loaded machine are just missed),
    every wait is for a condition, and the job ends by cancellation, not by its clock.
    """
    spool = tmp_path / "spool"
    rng = random.Random(20261202)
    with SimServer(time_scale=0.0, noise=True, serial=serial) as sim:
        resource = sim.serial_resource if serial else sim.tcp_resource
        plan = soak_plan(tmp_path / "p.yaml", resource, tmp_path / "out", every=every,
                         count=1_000_000, points=51 if serial else 101,
                         soak={"keep": {"every": 3}})
        assert main(["submit", str(plan), "--spool", str(spool)]) == 0
        job = Spool(spool).find("soak-test-001")
        for round_ in range(kills + 1):
            before = sweeps_done(job)
            proc = serve(spool, tmp_path / "serve.log", "--until-idle")
            # once its worker owns the job and has swept again, kill it at a random moment
            wait_for(lambda p=proc: worker_pid(Spool(spool), job.id) == p.pid, 60,
                     "the worker to start")
            wait_for(lambda n=before: sweeps_done(job) > n, 60, "a sweep after the restart")
            time.sleep(rng.uniform(0.0, 0.35))
            if proc.poll() is not None:
                raise AssertionError(f"the daemon exited early ({proc.returncode})")
            if round_ < kills:
                proc.kill()
                proc.wait(10)
                assert job.read_state()["state"] == "running"
        # the last daemon is left running: cancel from another shell, it stops cleanly
        assert main(["cancel", job.id, "--spool", str(spool)]) == 0
        assert proc.wait(60) == 0
    _, rows, faults = journal_rows(job)
    states = check_invariants(job, len(rows))
    assert job.read_state()["state"] == "cancelled"
    assert sum(f["kind"] == "restart" for f in faults) == kills
    counted = status_counts(job)
    assert counted["done"] == states["stored"] + states["measured"]
    assert counted["missed"] == states["missed"] and counted["pending"] == 0
    # every daemon, the killed ones and the last, took at least one sweep of its own
    assert states["stored"] + states["measured"] >= kills + 1


@pytest.mark.timeout(240)
def test_twenty_kills_during_one_job_leave_everything_consistent(tmp_path: Path) -> None:
    kill_test(tmp_path, kills=20, every="0.025 s", serial=False)


@pytest.mark.long
@pytest.mark.timeout(1200)
@pytest.mark.parametrize("serial", [False, True], ids=["tcp", "serial"])
def test_hundred_kills(tmp_path: Path, serial: bool) -> None:
    kill_test(tmp_path, kills=100, every="0.03 s", serial=serial)


def test_jobs_on_other_instruments_run_side_by_side_same_instrument_waits(
        tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    spool = tmp_path / "spool"
    with SimServer(time_scale=0.0) as one, SimServer(time_scale=0.0) as two:
        plans = [
            # long enough that bench-a still runs when the status is read, even on a busy
            # machine: bench-b (same instrument) must be seen waiting for it
            soak_plan(tmp_path / "a.yaml", one.tcp_resource, tmp_path / "out", every="0.05 s",
                      count=80, name="bench-a"),
            soak_plan(tmp_path / "b.yaml", one.tcp_resource.lower(), tmp_path / "out",
                      every="0.02 s", count=10, name="bench-b"),
            soak_plan(tmp_path / "c.yaml", two.tcp_resource, tmp_path / "out",
                      every="0.05 s", count=25, name="bench-c"),
        ]
        for plan in plans:
            assert main(["submit", str(plan), "--spool", str(spool)]) == 0
        capsys.readouterr()
        proc = serve(spool, tmp_path / "serve.log", "--until-idle")
        wait_for(lambda: Spool(spool).find("bench-c").read_state()["state"] == "running",
                 what="bench-c running")

        def b_waits_for_a() -> bool:
            return "waiting for bench-a-001 (same instrument)" in cli(
                capsys, "status", "--spool", str(spool))[1]

        wait_for(b_waits_for_a, what="status showing bench-b waiting for bench-a")
        assert proc.wait(60) == 0
    runs = {}
    for name in ("bench-a", "bench-b", "bench-c"):
        job = Spool(spool).find(name)
        check_invariants(job, {"bench-a": 80, "bench-b": 10, "bench-c": 25}[name])
        runs[name] = journal_rows(job)[0][0]
    assert runs["bench-c"]["started_utc"] < runs["bench-a"]["ended_utc"]  # side by side
    assert runs["bench-b"]["started_utc"] >= runs["bench-a"]["ended_utc"]  # waited its turn


def test_cancel_from_another_shell_and_without_a_daemon(tmp_path: Path,
                                                        capsys: pytest.CaptureFixture) -> None:
    spool = tmp_path / "spool"
    with SimServer(time_scale=0.0) as sim:
        plan = soak_plan(tmp_path / "p.yaml", sim.tcp_resource, tmp_path / "out",
                         every="0.05 s", count=100_000)
        assert main(["submit", str(plan), "--spool", str(spool)]) == 0
        assert main(["submit", str(plan), "--spool", str(spool)]) == 0
        proc = serve(spool, tmp_path / "serve.log")
        job = Spool(spool).find("soak-test-001")
        wait_for(lambda: (job.read_status().get("sweeps") or {}).get("done", 0) >= 3,
                 what="three sweeps")
        capsys.readouterr()
        code, out, _ = cli(capsys, "cancel", "soak-test-001", "--spool", str(spool))
        assert code == 0 and out.strip() == "job soak-test-001 cancelled"
        proc.send_signal(signal.SIGINT)
        assert proc.wait(20) == 0
    check_invariants(job, len(journal_rows(job)[1]))
    assert journal_rows(job)[0][0]["state"] == "stopped"
    # the second job never started (same instrument); cancel it with no daemon running
    code, out, _ = cli(capsys, "cancel", "soak-test-002", "--spool", str(spool))
    assert code == 0 and "cancelled (sweepd serve was not running)" in out
    code, out, _ = cli(capsys, "cancel", "soak-test-002", "--spool", str(spool))
    assert out.strip() == "job soak-test-002 is already cancelled"


def test_spool_is_private_and_bad_input_is_one_line(tmp_path: Path,
                                                     capsys: pytest.CaptureFixture) -> None:
    spool = tmp_path / "spool"
    with SimServer(time_scale=0.0) as sim:
        plan = soak_plan(tmp_path / "p.yaml", sim.tcp_resource, tmp_path / "out", count=3)
        assert main(["submit", str(plan), "--spool", str(spool)]) == 0
        assert subprocess.run([sys.executable, "-m", "acquire.cli", "serve", "--spool",
                               str(spool), "--until-idle", "-q"], cwd=HERE, timeout=60,
                              capture_output=True).returncode == 0
    job = Spool(spool).find("soak-test-001")
    for path in (spool, spool / "jobs", job.dir):
        assert stat.S_IMODE(path.stat().st_mode) == 0o700, path
    for path in (*job.dir.iterdir(), spool / "serve.lock", *job.data_dir.iterdir()):
        if path.is_file():
            assert not path.stat().st_mode & (stat.S_IWGRP | stat.S_IWOTH), path
    os.chmod(spool, 0o777)
    code, _, err = cli(capsys, "submit", str(plan), "--spool", str(spool))
    assert code == 2 and "writable by group or others (mode 0777)" in err
    os.chmod(spool, 0o700)
    bad = tmp_path / "bad.yaml"
    bad.write_text(plan.read_text().replace("every: 0 s", "every: soon"))
    code, _, err = cli(capsys, "submit", str(bad), "--spool", str(spool))
    assert code == 2 and err.count("\n") == 1 and "schedule.every: expected a time" in err
    no_schedule = tmp_path / "plain.yaml"
    no_schedule.write_text("\n".join(line for line in plan.read_text().splitlines()
                                     if not line.startswith(("schedule", "  every",
                                                             "  count"))))
    code, _, err = cli(capsys, "submit", str(no_schedule), "--spool", str(spool))
    assert code == 2 and "schedule: is required for a soak" in err
    code, _, err = cli(capsys, "status", "zzz", "--spool", str(spool))
    assert code == 2 and "no job 'zzz'" in err
