"""The demo: the main job end to end against a simulated analyzer in its own process.

It starts ``python -m simulators`` (TCP and a pseudo-terminal), writes demo plans that
point at it, and then does what a line does: calibrate, measure units against the mask,
plot, and report where every file is. Each step prints what it does and runs the same
code paths the real commands use.
"""

from __future__ import annotations

import shlex
import sys
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import yaml

from acquire.library import library_dir
from acquire.soak.demo import demo_step as soak_demo_step
from acquire.station.demo import demo_step as station_demo_step
from drivers.errors import SweepdError


class DemoError(SweepdError):
    """A demo step failed."""


@dataclass
class DemoContext:
    root: Path
    sim: object  # simulators.process.SimProcess
    plans: dict[str, Path] = field(default_factory=dict)
    produced: list[tuple[str, Path]] = field(default_factory=list)

    def fixture(self, op: str, **args: object) -> object:
        """One control-channel call to the simulated world (fixture, unit, faults)."""
        from simulators.control import SimControl

        with SimControl(*self.sim.control) as control:
            return control.call(op, **args)

    def sweepd(self, *argv: str) -> int:
        from acquire.cli import main

        print(f"  $ sweepd {shlex.join(argv)}", flush=True)
        code = main(list(argv))
        if code == 2:
            raise DemoError(f"'sweepd {argv[0]}' failed (see the message above)")
        return code


def demo_plan(ctx: DemoContext, name: str, resource: str, **changes: object) -> Path:
    """Copy a shipped plan into the demo folder, pointed at the simulator."""
    data = yaml.safe_load((library_dir("plans") / f"{name}.yaml").read_text())
    data["instrument"]["resource"] = resource
    data["output"]["dir"] = str(ctx.root / "results" / name)
    data.update(changes)
    if "calibration" in data:
        data["calibration"]["prompt"] = "command"
        data["calibration"]["switch"] = {
            "command": f"{shlex.quote(sys.executable)} -m simulators.control "
                       f"{ctx.sim.control_text} connect {{standard}}"
        }
    path = ctx.root / "plans" / f"{name}.yaml"
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(yaml.safe_dump(data, sort_keys=False))
    ctx.plans[name] = path
    return path


def step_plans(ctx: DemoContext) -> None:
    demo_plan(ctx, "patch-line-a", ctx.sim.tcp_resource)  # its checks as shipped
    demo_plan(ctx, "whip-915", ctx.sim.serial_resource)
    print(f"  plans written to {ctx.root / 'plans'}")


def step_calibrate(ctx: DemoContext) -> None:
    """A scripted technician who first connects the wrong standard, then gets it right."""
    plan = ctx.plans["patch-line-a"]
    out = ctx.root / "results" / "patch-line-a"
    print("  (the scripted technician connects a SHORT where the OPEN belongs, "
          "then follows the prompts)")
    ctx.sweepd("calibrate", str(plan), "--prompt", "scripted",
               "--script", "short,short,open,load", "--ascii")
    ctx.fixture("connect", what="device")
    ctx.produced.append(("cal sets", out / "cal"))


def step_measure(ctx: DemoContext) -> None:
    plan = ctx.plans["patch-line-a"]
    out = ctx.root / "results" / "patch-line-a"
    for serial in ("PA-0001", "PA-0002", "PA-0003"):
        ctx.fixture("unit", serial=serial)
        ctx.sweepd("run", str(plan), "--serial", serial, "--output", str(out))
    ctx.produced.append(("patch line captures", out))


def step_plot(ctx: DemoContext) -> None:
    out = ctx.root / "results" / "patch-line-a"
    captures = sorted(out.glob("*.s1p"))
    if not captures:
        return
    png = ctx.root / "plots" / f"{captures[0].stem}.png"
    png.parent.mkdir(parents=True, exist_ok=True)
    ctx.sweepd("plot", str(captures[0]), "--mask", "patch-2g45", "-o", str(png))
    ctx.produced.append(("plots", png.parent))


STEPS: list[tuple[str, Callable[[DemoContext], None]]] = [
    ("Write demo plans that point at the simulator", step_plans),
    ("Calibrate at the end of the test cable (open, short, load)", step_calibrate),
    ("Measure three patch antennas against the mask", step_measure),
    ("Plot one capture: match, impedance, Smith chart", step_plot),
    ("A short production shift at the station: golden checks, 20 units, summary",
     station_demo_step),
    ("A short overnight soak through the daemon: submit, serve, status, report", soak_demo_step),
]


MARKER = ".sweepd-demo"  # written into every demo folder; only such a folder is cleared


def prepare_folder(root: Path) -> None:
    """Start from a clean folder: a folder an earlier demo made is emptied (said so); a
    folder holding anything else is refused, so no file of the user's is ever removed."""
    import shutil

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
    from simulators.process import SimProcess

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
