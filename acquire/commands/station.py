"""``sweepd station PLAN``: the operator's loop at a production fixture."""

from __future__ import annotations

import argparse

EPILOG = """\
at the 'serial>' prompt: scan or type a serial, then Enter; or
  g  golden check now   c  calibrate now   s  counters   ?  help   q  quit
end of input (Ctrl-D) and Ctrl-C also end the shift; nothing saved is ever lost.

Exit codes: 0 shift ended, 2 error, 130 interrupted."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.formatter_class = argparse.RawDescriptionHelpFormatter
    parser.epilog = EPILOG
    parser.add_argument("plan", help="test plan (YAML) with checks and a station section")
    parser.add_argument("--resource", help="VISA resource string; overrides the plan's")
    parser.add_argument("--station", metavar="ID",
                        help="station id recorded with the shift (default: the plan's "
                             "station.id, else asked at start)")
    parser.add_argument("--operator", metavar="NAME", help="operator recorded with the shift")
    parser.add_argument("--lot", metavar="LOT", help="lot recorded with the shift")
    parser.add_argument("--output", metavar="DIR",
                        help="output folder; overrides the plan's output.dir")
    parser.add_argument("--no-color", action="store_true", help="never use colour")


def run(args: argparse.Namespace) -> int:

    from acquire.commands import cli_path
    from acquire.plan import load_plan
    from acquire.station.loop import Station, StationOptions
    from acquire.station.terminal import Terminal

    plan = load_plan(args.plan)
    options = StationOptions(
        resource=args.resource, station_id=args.station, operator=args.operator, lot=args.lot,
        out_dir=cli_path(args.output) if args.output else None,
    )
    term = Terminal(color=False if args.no_color else None)
    return Station(plan, options, term).run()
