"""What every demo step shares: the folder, the simulator, the plans and files produced."""

from __future__ import annotations

import shlex
import sys
from dataclasses import dataclass, field
from pathlib import Path

import yaml

from acquire.cli import main as sweepd_main
from acquire.library import library_dir
from drivers.errors import SweepdError
from simulators.control import SimControl
from simulators.process import SimProcess


class DemoError(SweepdError):
    """A demo step failed."""


@dataclass
class DemoContext:
    root: Path
    sim: SimProcess
    plans: dict[str, Path] = field(default_factory=dict)
    produced: list[tuple[str, Path]] = field(default_factory=list)

    def fixture(self, op: str, **args: object) -> object:
        """One control-channel call to the simulated world (fixture, unit, faults)."""
        with SimControl(*self.sim.control) as control:
            return control.call(op, **args)

    def sweepd(self, *argv: str) -> int:
        """Run one sweepd command in this process, as a user would type it."""
        print(f"  $ sweepd {shlex.join(argv)}", flush=True)
        code = sweepd_main(list(argv))
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
