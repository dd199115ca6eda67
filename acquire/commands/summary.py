"""``sweepd summary OUTPUT_DIR``: yield and per-metric statistics (Ppk, Cpk) from the
journal of an output folder, and a CSV export of its measurements."""

from __future__ import annotations

import argparse

EPILOG = """\
--since takes a date or time (2026-12-02, 2026-12-02T06:00; local time unless it ends in Z
or gives an offset) or a duration back from now (8 h, 30 min, 2 d).
--csv writes one row per measurement (base units); without FILE, or with '-', the CSV goes
to stdout instead of the statistics.

Statistics use the first measurement of each unit unless --all-attempts; golden checks are
left out. Units without a verdict (a plan without checks) are counted as unjudged, and the
yield is over judged units. Against the limits of the checks:
  Ppk = min(USL - mean, mean - LSL) / (3 sd), sd over all values;
  Cpk = the same with the pooled sd within subgroups (the journal's runs)."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.formatter_class = argparse.RawDescriptionHelpFormatter
    parser.epilog = EPILOG
    parser.add_argument("output_dir", metavar="OUTPUT_DIR", help="folder holding journal.sqlite")
    parser.add_argument("--since", metavar="T", help="only measurements from this time on")
    parser.add_argument("--plan", metavar="NAME", help="only this plan")
    parser.add_argument("--all-attempts", action="store_true",
                        help="statistics over every measurement, retests included")
    parser.add_argument("--csv", nargs="?", const="-", metavar="FILE",
                        help="export the measurements as CSV (to FILE, or stdout)")
    parser.add_argument("--json", action="store_true", help="print the statistics as JSON")


def run(args: argparse.Namespace) -> int:
    from acquire.commands.jsonout import run_with_json_errors

    return run_with_json_errors(args, "summary", lambda: _run(args))


def _run(args: argparse.Namespace) -> int:
    import json
    import sys
    from pathlib import Path

    from acquire.station.summary import load_selection, parse_since

    since = parse_since(args.since) if args.since else None
    selection = load_selection(Path(args.output_dir), since_utc=since, plan=args.plan,
                               all_attempts=args.all_attempts)
    if args.csv == "-":
        sys.stdout.write(selection.csv())
        return 0
    if args.csv:
        path = selection.write_csv(Path(args.csv))
    if args.json:
        print(json.dumps(selection.to_dict(), indent=2, allow_nan=False))
    else:
        print("\n".join(selection.lines()))
    if args.csv:
        print(f"CSV: {path}", file=sys.stderr if args.json else sys.stdout)
    return 0
