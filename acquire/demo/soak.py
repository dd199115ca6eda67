"""The demo's soak step: a short overnight run in seconds, through the real daemon.

It writes a soak plan from the shipped ``patch-soak`` pointed at the demo's simulator,
turns on a simulated drift (a temperature cycle moving the resonance, a slow linear
drift and white jitter) with the simulator's clock running fast, schedules a dropped
connection, a garbage reply and an instrument restart, then does what an engineer does:
``sweepd submit``, ``sweepd serve`` in its own process, ``sweepd status`` while it runs,
and ``sweepd report`` in the morning.
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

import yaml

from acquire.demo.context import DemoContext
from acquire.library import library_dir
from acquire.soak.spool import Spool

SWEEPS = 40
EVERY_S = 0.15
CLOCK_RATE = 900.0  # simulated seconds per real second: the 6 s soak covers 1.5 h


def soak_plan(ctx: DemoContext) -> Path:
    data = yaml.safe_load((library_dir("plans") / "patch-soak.yaml").read_text())
    data["instrument"]["resource"] = ctx.sim.tcp_resource
    data["instrument"]["timeout"] = "1 s"  # a lost reply costs one second, not five
    data["output"]["dir"] = str(ctx.root / "results" / "patch-soak")
    data["schedule"] = {"every": f"{EVERY_S} s", "count": SWEEPS}
    data["soak"]["keep"] = {"every": 5, "failing": True, "over_threshold": True}
    data["soak"]["alarms"]["resonance_shift"] = "1 MHz"
    data["soak"]["faults"] = {"retries": 2, "backoff_first": "0.1 s", "backoff_max": "1 s"}
    path = ctx.root / "plans" / "patch-soak.yaml"
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(yaml.safe_dump(data, sort_keys=False))
    ctx.plans["patch-soak"] = path
    return path


def demo_step(ctx: DemoContext) -> None:
    """Submit, serve, watch and report a short soak against the demo's simulator."""
    plan = soak_plan(ctx)
    spool = ctx.root / "spool"
    log = ctx.root / "soak-serve.log"
    now = ctx.fixture("state")["instrument"]["sweep_count"]
    ctx.fixture("clock", rate=CLOCK_RATE)
    ctx.fixture("drift", period_s=4 * 3600.0, amplitude_c=6.0, tempco_hz_per_c=-150e3,
                rate_hz_per_s=20.0, jitter_hz=20e3)
    ctx.fixture("schedule", at=[[now + 8, "drop"], [now + 17, "garbage"],
                                [now + 22, "reboot", {"down_s": 0.4}]])
    try:
        ctx.sweepd("submit", str(plan), "--spool", str(spool))
        print(f"  $ sweepd serve --spool {spool} --until-idle   (own process; log {log})",
              flush=True)
        with open(log, "wb") as err:
            proc = subprocess.Popen([sys.executable, "-m", "acquire.cli", "serve", "--spool",
                                     str(spool), "--until-idle"], stdout=subprocess.DEVNULL,
                                    stderr=err)
        try:
            time.sleep(SWEEPS * EVERY_S / 2)
            ctx.sweepd("status", "--spool", str(spool))
            proc.wait(timeout=120)
        finally:
            if proc.poll() is None:
                proc.terminate()
                proc.wait(30)
        ctx.sweepd("status", "--spool", str(spool))
        job = _job_id(spool)
        ctx.sweepd("report", job, "--spool", str(spool))
    finally:
        ctx.fixture("clear_faults")
        ctx.fixture("drift")
        ctx.fixture("clock", rate=1.0)
    report = ctx.root / "results" / "patch-soak" / job / "report"
    ctx.produced.append(("soak report (open summary.html)", report))
    ctx.produced.append(("soak daemon log", log))


def _job_id(spool: Path) -> str:
    return Spool(spool).jobs()[-1].id
