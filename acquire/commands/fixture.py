"""``sweepd fixture ADDRESS OP ...``: drive the simulator's fixture, device and faults.

A thin front to ``simulators.control``: the demo and scripted calibrations use it as the
per-step command (``sweepd fixture 127.0.0.1:40124 connect {standard}``).
"""

from __future__ import annotations

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "words", nargs=argparse.REMAINDER,
        help="HOST:PORT of the simulator's control channel, then an operation, "
             "e.g. '127.0.0.1:40124 connect open' (see 'sweepd fixture --help-ops')",
    )


def run(args: argparse.Namespace) -> int:
    from simulators.control import main

    return int(main(args.words, prog="sweepd fixture"))
