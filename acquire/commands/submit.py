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

    from acquire.soak.spool import Spool
    from acquire.soak.submit import submit_plan

    spool = Spool(args.spool)
    done = submit_plan(spool, Path(args.plan), resource=args.resource,
                       output=Path(args.output) if args.output else None)
    if args.json:
        print(json.dumps({"job": done.job.id, "uid": done.job.uid, "spool": str(spool.root),
                          "resource": done.resource, "data_dir": str(done.job.data_dir)}))
    else:
        print(done.describe())
    if spool.daemon_pid() is None:
        serve = shlex.join(["sweepd", "serve", "--spool", str(spool.root)])
        print(f"sweepd: note: no sweepd serve runs on spool {spool.root}; start it to run the "
              f"job: {serve} (or start the sweepd service)", file=sys.stderr)
    return 0
