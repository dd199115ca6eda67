"""The demo's production shift: ``sweepd station`` driven through its terminal interface.

A program stands in for the operator (``acquire.demo.operator``): it answers the
station's prompts over a pipe while putting each unit of the simulated lot on the
fixture before typing its serial. The shift: the station finds no cal set and runs the
calibration procedure; golden check at the start; twenty units, one malformed label and
one retest; at the second golden check the fixture has been bumped, the line stops, the
fixture is put back and the re-check passes; then the summary with Ppk, Cpk and a CSV export,
and one ``sweepd measure --json`` call as an MES would make it.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import TextIO

import yaml

from acquire.demo.context import DemoContext, DemoError, demo_plan
from acquire.demo.operator import Operator
from acquire.library import library_dir

SERIALS = [f"PA-{n:04d}" for n in range(101, 121)]
MALFORMED = "PA-01/7"  # a label misread by the scanner
GOLDEN_EVERY = 8


class _Indented:
    """Echo the station's output indented under the demo's own lines."""

    def __init__(self, out: TextIO, prefix: str = "  | ") -> None:
        self.out, self.prefix, self.at_start = out, prefix, True

    def write(self, text: str) -> None:
        for part in text.splitlines(keepends=True):
            if self.at_start:
                self.out.write(self.prefix)
            self.out.write(part)
            self.at_start = part.endswith("\n")

    def flush(self) -> None:
        self.out.flush()


def station_plan(ctx: DemoContext) -> Path:
    """The shipped patch-station plan, pointed at the demo's simulator."""
    source = library_dir("plans")
    station = yaml.safe_load((source / "patch-station.yaml").read_text())["station"]
    station["id"] = "demo-line-1"
    station["golden"]["reference"] = str(source / "golden" / "patch-station-golden.s1p")
    station["golden"]["every_units"] = GOLDEN_EVERY
    return demo_plan(ctx, "patch-station", ctx.sim.tcp_resource, station=station)


def demo_step(ctx: DemoContext) -> None:
    """Run a short simulated shift and summarise it (see the module docstring)."""
    plan = station_plan(ctx)
    out = ctx.root / "results" / "patch-station"
    queue: list[str] = [*SERIALS[:5], MALFORMED, *SERIALS[5:12], "RETEST", *SERIALS[12:]]
    golden_prompts = 0
    failed_first: str | None = None
    print(f"  $ sweepd station {plan} --no-color   (an operator program answers the prompts)",
          flush=True)
    with Operator([str(plan), "--no-color"], echo=_Indented(sys.stdout)) as station:
        while True:
            text = station.expect()
            if text.endswith("cal> "):
                station.send("c")
            elif text.endswith("golden> "):
                golden_prompts += 1
                if golden_prompts == 2:  # somebody bumped the fixture since the last check
                    ctx.fixture("disturb")
                ctx.fixture("unit", serial="GOLDEN")
                station.send("")
            elif text.endswith("stopped> "):
                ctx.fixture("restore")  # the fixture is put back and tightened
                ctx.fixture("unit", serial="GOLDEN")
                station.send("g")
            elif text.endswith("serial> "):
                if failed_first is None and "FAIL" in text:
                    failed_first = _last_serial(text)
                if not queue:
                    station.send("q")
                    break
                serial = queue.pop(0)
                if serial == "RETEST":
                    serial = failed_first or SERIALS[0]
                if serial != MALFORMED:
                    ctx.fixture("unit", serial=serial)
                station.send(serial)
            else:
                raise DemoError(f"station asked something unexpected: {text[-200:]!r}")
        code = station.wait()
    if code != 0:
        raise DemoError(f"sweepd station ended with exit status {code}")
    csv_path = out / "shift-summary.csv"
    ctx.sweepd("summary", str(out), "--csv", str(csv_path))
    ctx.fixture("unit", serial="PA-0121")
    ctx.sweepd("measure", str(plan), "--serial", "PA-0121", "--json")
    ctx.produced.append(("station shift (files, journal)", out))
    ctx.produced.append(("station summary CSV", csv_path))


def _last_serial(text: str) -> str | None:
    for line in reversed(text.splitlines()):
        line = line.strip()
        if line.endswith(": FAIL") or ": FAIL " in line:
            return line.split(":", 1)[0]
    return None
