"""The demo's steps in order, and ``run_demo``: a simulator in its own process (TCP and a
pseudo-terminal), then what a line does in a day. Each step prints what it does and runs
the same code paths the real commands use."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from acquire.demo import line, soak, station
from acquire.demo.context import DemoContext
from simulators.process import SimProcess

STEPS: list[tuple[str, Callable[[DemoContext], None]]] = [
    ("Write demo plans that point at the simulator", line.step_plans),
    ("Calibrate at the end of the test cable (open, short, load)", line.step_calibrate),
    ("Measure three patch antennas against the mask", line.step_measure),
    ("Plot one capture: match, impedance, Smith chart", line.step_plot),
    ("A short production shift at the station: golden checks, 20 units, summary",
     station.demo_step),
    ("A short overnight soak through the daemon: submit, serve, status, report",
     soak.demo_step),
]


def run_demo(root: Path, *, sim_args: list[str] | None = None) -> int:
    root = root.resolve()
    root.mkdir(parents=True, exist_ok=True)
    args = sim_args or ["--serial", "--time-scale", "0.02", "--seed", "7"]
    print(f"sweepd demo: working in {root}")
    with SimProcess(args) as sim:
        print(f"simulator listening: {', '.join(sim.resources)}; control {sim.control_text}")
        ctx = DemoContext(root, sim)
        for n, (title, step) in enumerate(STEPS, 1):
            print(f"\n[{n}/{len(STEPS)}] {title}", flush=True)
            step(ctx)
    print("\nDemo finished. Files:")
    for label, path in ctx.produced:
        print(f"  {label:32s} {path}")
    return 0
