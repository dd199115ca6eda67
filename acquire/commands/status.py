"""``sweepd status [JOB...] [--json]``: every job's state, sweeps, faults, drift, alarms."""

from __future__ import annotations

import argparse

from acquire.commands.serve import add_spool_argument


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("jobs", nargs="*", metavar="JOB", help="only these jobs (id or prefix)")
    parser.add_argument("--json", action="store_true", help="one JSON object for machines")
    parser.add_argument("--watch", type=watch_seconds, metavar="SECONDS",
                        help="print again every SECONDS until no job is active (Ctrl-C stops)")
    add_spool_argument(parser)


WATCH_RANGE = (0.2, 86400.0)


def watch_seconds(text: str) -> float:
    """``--watch``: a finite number of seconds from 0.2 to one day (not 0, -1 or nan)."""
    import math

    try:
        value = float(text)
    except ValueError:
        value = math.nan
    lo, hi = WATCH_RANGE
    if not lo <= value <= hi:  # also false for nan
        shown = ascii(text[:20]) + ("..." if len(text) > 20 else "")
        raise argparse.ArgumentTypeError(f"must be a number of seconds from {lo:g} to "
                                         f"{hi:g}, got {shown}")
    return value


def run(args: argparse.Namespace) -> int:
    from acquire.commands.jsonout import run_with_json_errors

    return run_with_json_errors(args, "status", lambda: _run(args))


def _run(args: argparse.Namespace) -> int:
    import json
    import time

    from acquire.soak.spool import ACTIVE_STATES, Spool
    from acquire.soak.status import format_view, spool_view

    spool = Spool(args.spool)
    while True:
        only = [spool.find(text) for text in args.jobs] if args.jobs else None
        view = spool_view(spool, only)
        if args.json:
            print(json.dumps(view, indent=2 if args.watch is None else None), flush=True)
        else:
            print(format_view(view), flush=True)
        active = any(j["state"] in ACTIVE_STATES for j in view["jobs"])
        if args.watch is None or not active:
            return 0
        time.sleep(args.watch)
        if not args.json:
            print()
