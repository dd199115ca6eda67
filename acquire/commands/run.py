"""``sweepd run PLAN``: connect, configure, sweep once, save, print a summary."""

from __future__ import annotations

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("plan", help="test plan (YAML)")
    parser.add_argument("--resource", help="VISA resource string; overrides the plan's")
    parser.add_argument("--serial", default="", help="DUT serial recorded with the sweep")
    parser.add_argument("--output", help="output folder; overrides the plan's output.dir")
    parser.add_argument("--operator", metavar="NAME", help="operator recorded with the run")
    parser.add_argument("--lot", metavar="LOT", help="lot recorded with the run")
    parser.add_argument("--json", action="store_true", help="print one JSON object for machines")
    parser.epilog = ("Exit codes: 0 pass (or no checks), 1 fail, 2 error, 3 indeterminate "
                     "(the plan's decision: guarded, a value within the guard band).")


def run(args: argparse.Namespace) -> int:
    from acquire.commands.jsonout import run_with_json_errors

    return run_with_json_errors(args, "run", lambda: _run(args))


def _run(args: argparse.Namespace) -> int:
    import json

    from acquire.capture.run import run_plan
    from acquire.commands import cli_path
    from acquire.journal.labels import check_lot, check_operator
    from acquire.plan import load_plan

    check_lot(args.lot)
    check_operator(args.operator)
    plan = load_plan(args.plan)
    out_dir = cli_path(args.output) if args.output else plan.output.dir
    result = run_plan(plan, out_dir, resource=args.resource, serial=args.serial,
                      operator=args.operator, lot=args.lot)
    if args.json:
        print(json.dumps(result.summary(), sort_keys=True))
    else:
        print(result.one_line())
        if not args.serial:
            print("  note: no --serial given; the sweep is recorded without a serial and its "
                  "file is named with 'unit' (give --serial SERIAL to name it)")
    return result.exit_code
