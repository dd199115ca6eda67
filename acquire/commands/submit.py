"""``sweepd submit PLAN``: queue a soak job (the plan's ``schedule:`` and ``soak:``)."""

from __future__ import annotations

import argparse

from acquire.commands.serve import add_spool_argument


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("plan", help="soak plan (YAML with schedule: and soak: sections)")
    parser.add_argument("--resource", help="VISA resource string; overrides the plan's")
    parser.add_argument("--output", help="output folder; overrides the plan's output.dir")
    parser.add_argument("--json", action="store_true", help="print the job as one JSON object")
    add_spool_argument(parser)


def run(args: argparse.Namespace) -> int:
    from acquire.commands.jsonout import run_with_json_errors

    return run_with_json_errors(args, "submit", lambda: _run(args))


def _run(args: argparse.Namespace) -> int:
    import json
    import shlex
    import sys
    from pathlib import Path

    from acquire.errors import PlanError
    from acquire.plan import _RESOURCE, load_plan
    from acquire.soak.drift import reference_from_file
    from acquire.soak.spec import parse_soak
    from acquire.soak.spool import Spool
    from acquire.units import format_duration

    path = Path(args.plan)
    plan = load_plan(path)
    spec = parse_soak(plan)
    if spec.reference is not None:  # readable, has the parameter, covers the sweep
        reference_from_file(spec.reference, spec.parameter, spec.band_hz,
                            plan.stimulus.frequencies())
    resource = args.resource or plan.instrument.resource
    if not _RESOURCE.match(resource):
        raise PlanError(f"--resource: not a supported VISA resource string: {resource!r}")
    output = Path(args.output or plan.output.dir).expanduser().resolve()
    spool = Spool(args.spool)
    job = spool.create_job(plan.name, path.resolve(), path.read_text(encoding="utf-8"),
                           output, resource)
    s = spec.schedule
    every = f"every {format_duration(s.every_s)}" if s.every_s > 0 else "back to back"
    extent = (f"{s.count} sweeps" if s.count is not None else
              f"for {format_duration(s.duration_s)}" if s.duration_s is not None
              else "until cancelled")
    if args.json:
        print(json.dumps({"job": job.id, "uid": job.uid, "spool": str(spool.root),
                          "resource": resource, "data_dir": str(job.data_dir)}))
    else:
        print(f"submitted {job.id}: {plan.name} on {resource}, {every}, {extent}; "
              f"files in {job.data_dir}")
    if spool.daemon_pid() is None:
        serve = shlex.join(["sweepd", "serve", "--spool", str(spool.root)])
        print(f"sweepd: note: no sweepd serve runs on spool {spool.root}; start it to run the "
              f"job: {serve} (or start the sweepd service)", file=sys.stderr)
    return 0
