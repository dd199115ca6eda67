"""``sweepd export FILE.sNp [-q QUANTITY ...] [--param SIJ ...] [-o OUT.csv]``.

Trace data as CSV for a spreadsheet: frequency plus the chosen quantities of the chosen
parameters. The CSV is written as a new file beside the input (an existing file is never
replaced: a free name ``-2``, ``-3`` is taken), or to stdout with ``-o -``.
Exit codes: 0 written, 2 error.
"""

from __future__ import annotations

import argparse

_QUANTITY_NAMES = ("db", "phase", "real", "imag", "group-delay", "swr", "return-loss", "r",
                   "x")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", help="Touchstone file (.s1p, .s2p, ..., .ts)")
    parser.add_argument(
        "-q", "--quantity", action="append", choices=_QUANTITY_NAMES, metavar="QUANTITY",
        help=f"column to write for each parameter, repeat for several: "
             f"{', '.join(_QUANTITY_NAMES)} (default: db and phase); swr, return-loss, "
             "r and x are written for reflections only",
    )
    parser.add_argument("--param", action="append", metavar="SIJ",
                        help="parameter to write, repeat for several (default: all)")
    parser.add_argument("-o", "--output", metavar="OUT",
                        help="CSV file to write, or - for stdout (default: FILE with .csv)")
    parser.epilog = "Exit codes: 0 written, 2 error."


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from acquire.commands.check import read_sweep
    from acquire.storage import write_new
    from acquire.tracecsv import DEFAULT_QUANTITIES, to_csv, trace_columns

    sweep = read_sweep(args.file)
    columns = trace_columns(sweep, args.param or (), args.quantity or DEFAULT_QUANTITIES)
    text = to_csv(columns)
    if args.output == "-":
        print(text, end="")
        return 0
    out = Path(args.output) if args.output else Path(args.file).with_suffix(".csv")
    written = write_new(out, text)
    print(f"{written}: {len(columns) - 1} columns, {sweep.points} rows")
    return 0
