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


MARKER = ".sweepd-demo"  # written into every demo folder; only such a folder is cleared


def prepare_folder(root: Path) -> None:
    """Start from a clean folder: a folder an earlier demo made is emptied (said so); a
    folder holding anything else is refused, so no file of the user's is ever removed."""
    import shutil

    from acquire.demo.context import DemoError

    if root.exists() and not root.is_dir():
        raise DemoError(f"demo folder {root} is a file; give --dir FOLDER")
    if root.is_dir() and any(root.iterdir()):
        if not (root / MARKER).is_file():
            raise DemoError(f"demo folder {root} holds files the demo did not make; "
                            "give --dir NEW_FOLDER or empty it")
        print(f"sweepd demo: {root} holds an earlier demo's files; removing them to start "
              "clean")
        for entry in root.iterdir():
            if entry.is_dir() and not entry.is_symlink():
                shutil.rmtree(entry)
            else:
                entry.unlink()
    root.mkdir(parents=True, exist_ok=True)
    (root / MARKER).write_text("made by sweepd demo; the next demo run empties this folder\n")


def run_demo(root: Path, *, sim_args: list[str] | None = None) -> int:
    root = root.resolve()
    prepare_folder(root)
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
