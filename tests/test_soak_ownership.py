"""The daemon trusts only what its own user owns and nobody else may write: the spool, job
files, the folders it writes and the alarm commands it runs (a spool in a shared folder,
planted by another user, must never run that user's command as the daemon's user)."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest
from test_soak_support import soak_plan, submit

from acquire.soak.ownership import OwnershipError, check_command, check_private
from acquire.soak.spool import Spool
from acquire.soak.worker import SoakWorker, StopSignal
from simulators.server import SimServer

HERE = Path(__file__).resolve().parents[1]
OTHER_UID = 65534  # 'nobody' on Debian and most distributions

needs_root = pytest.mark.skipif(
    os.geteuid() != 0, reason="giving a file to another user (chown) needs root")


def give_away(path: Path, mode: int) -> None:
    os.chown(path, OTHER_UID, OTHER_UID)
    os.chmod(path, mode)


def marker_command(tmp_path: Path) -> tuple[Path, Path]:
    """An executable that leaves a marker file when it runs."""
    marker = tmp_path / "ran"
    script = tmp_path / "alarm.sh"
    script.write_text(f"#!/bin/sh\ntouch {marker}\n")
    script.chmod(0o755)
    return script, marker


def test_own_private_files_are_trusted_open_ones_are_not(tmp_path: Path) -> None:
    mine = tmp_path / "mine"
    mine.write_text("x")
    mine.chmod(0o644)
    check_private(mine, "job file")
    mine.chmod(0o664)
    with pytest.raises(OwnershipError, match=r"job file .*mine: writable by group or others "
                       r"\(mode 0664\)"):
        check_private(mine, "job file")
    check_private(tmp_path / "absent", "job file")  # created later with our own mode


def test_a_system_executable_owned_by_root_may_run() -> None:
    path = check_command(["sh", "-c", "true"], "alarm command")
    assert path.name == "sh"
    with pytest.raises(OwnershipError, match="alarm command 'no-such-tool-here': not found"):
        check_command(["no-such-tool-here"], "alarm command")


@needs_root
def test_a_link_to_another_users_file_is_refused(tmp_path: Path) -> None:
    target = tmp_path / "theirs"
    target.write_text("x")
    give_away(target, 0o644)
    link = tmp_path / "link"
    link.symlink_to(target)
    with pytest.raises(OwnershipError, match=r"theirs: owned by .*uid 65534"):
        check_private(link, "job file")


@needs_root
def test_serve_refuses_a_spool_another_user_created(tmp_path: Path) -> None:
    shared = tmp_path / "shared"
    shared.mkdir(mode=0o777)
    spool = shared / "spool"
    (spool / "jobs").mkdir(parents=True)
    give_away(spool / "jobs", 0o755)
    give_away(spool, 0o755)
    done = subprocess.run([sys.executable, "-m", "acquire.cli", "serve", "--spool", str(spool),
                           "--until-idle", "-q"], cwd=HERE, timeout=60, capture_output=True,
                          text=True)
    assert done.returncode == 2, done.stderr
    assert done.stderr.count("\n") == 1, done.stderr
    assert "owned by" in done.stderr and "uid 65534" in done.stderr


@needs_root
def test_a_planted_job_is_never_run(tmp_path: Path) -> None:
    script, marker = marker_command(tmp_path)
    spool = Spool(tmp_path / "spool").ensure()
    with SimServer(time_scale=0.0) as sim:
        plan = soak_plan(tmp_path / "p.yaml", sim.tcp_resource, tmp_path / "out", count=3,
                         soak={"alarms": {"deviation_db": "0 dB", "command": str(script)}})
        job = submit(spool, plan)
        give_away(job.dir / "job.json", 0o644)
        done = subprocess.run([sys.executable, "-m", "acquire.cli", "serve", "--spool",
                               str(spool.root), "--until-idle"], cwd=HERE, timeout=60,
                              capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    assert "job.json: owned by" in done.stderr and "the job is not run" in done.stderr
    assert job.read_state()["state"] == "queued"
    assert not marker.exists()
    assert not (tmp_path / "out" / "journal.sqlite").exists()


def run_job(tmp_path: Path, sim: SimServer, soak: dict) -> tuple[str, dict]:
    spool = Spool(tmp_path / "spool").ensure()
    plan = soak_plan(tmp_path / "p.yaml", sim.tcp_resource, tmp_path / "out", count=3,
                     soak=soak)
    job = submit(spool, plan)
    state = SoakWorker(job, StopSignal()).run()
    return state, job.read_state()


@needs_root
def test_an_alarm_command_another_user_owns_fails_the_job(tmp_path: Path) -> None:
    script, marker = marker_command(tmp_path)
    give_away(script, 0o755)
    with SimServer(time_scale=0.0) as sim:
        state, record = run_job(tmp_path, sim, {"alarms": {"deviation_db": "0 dB",
                                                           "command": str(script)}})
    assert state == "failed"
    assert record["reason"].startswith("alarm command ") and "uid 65534" in record["reason"]
    assert not marker.exists()


def test_a_group_writable_alarm_command_fails_the_job(tmp_path: Path) -> None:
    script, marker = marker_command(tmp_path)
    script.chmod(0o775)
    with SimServer(time_scale=0.0) as sim:
        state, record = run_job(tmp_path, sim, {"alarms": {"deviation_db": "0 dB",
                                                           "command": str(script)}})
    assert state == "failed" and "writable by group or others" in record["reason"]
    assert not marker.exists()


@needs_root
def test_an_output_folder_another_user_owns_fails_the_job(tmp_path: Path) -> None:
    out = tmp_path / "out"
    out.mkdir()
    give_away(out, 0o777)
    with SimServer(time_scale=0.0) as sim:
        state, record = run_job(tmp_path, sim, {})
    assert state == "failed"
    assert record["reason"].startswith("output folder ") and "owned by" in record["reason"]
    assert not (out / "journal.sqlite").exists()
