"""``sweepd measure PLAN --serial X``: one unit, non-interactively, for MES calls."""

from __future__ import annotations

import argparse

EPILOG = """\
The same serial check, calibration rules, checks, files and journal as 'sweepd station'.
With --json one JSON object is printed on stdout in every case (errors included).

Exit codes: 0 pass (golden: within tolerance), 1 fail, 2 error (one line on stderr),
3 indeterminate (guarded acceptance: within the guard band; retest or hold)."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.formatter_class = argparse.RawDescriptionHelpFormatter
    parser.epilog = EPILOG
    parser.add_argument("plan", help="test plan (YAML)")
    target = parser.add_mutually_exclusive_group()
    target.add_argument("--serial", help="the unit's serial (checked against the plan)")
    target.add_argument("--golden", action="store_true",
                        help="measure the plan's golden unit and compare it with its reference")
    parser.add_argument("--resource", help="VISA resource string; overrides the plan's")
    parser.add_argument("--output", metavar="DIR",
                        help="output folder; overrides the plan's output.dir")
    parser.add_argument("--station", metavar="ID", help="station id recorded with the run")
    parser.add_argument("--operator", metavar="NAME", help="operator recorded with the run")
    parser.add_argument("--lot", metavar="LOT", help="lot recorded with the run")
    parser.add_argument("--json", action="store_true", help="print one JSON object")


def run(args: argparse.Namespace) -> int:
    import json
    import sys

    from acquire.commands import cli_path
    from acquire.station.measure import Request, measure_one, result_dict, result_line
    from drivers.errors import SweepdError

    plan_name = None
    try:
        from acquire.plan import load_plan

        plan = load_plan(args.plan)
        plan_name = plan.name
        request = Request(serial=args.serial, golden=args.golden, resource=args.resource,
                          out_dir=cli_path(args.output) if args.output else None,
                          station_id=args.station, operator=args.operator, lot=args.lot)
        outcome = measure_one(plan, request)
    except Exception as exc:  # an error, or anything unforeseen: with --json still one object
        if not args.json:
            raise
        from acquire.errors import internal_error_text
        from drivers.yamlnode import one_line

        message = one_line(str(exc) if isinstance(exc, SweepdError) else internal_error_text(exc))
        print(json.dumps(result_dict(None, plan=plan_name, serial=args.serial, error=message),
                         sort_keys=False))
        print(f"sweepd: error: {message}", file=sys.stderr)
        return 2
    if args.json:
        print(json.dumps(result_dict(outcome), allow_nan=False))
    else:
        print(result_line(outcome))
    return outcome.exit_code
