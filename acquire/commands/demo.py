"""``sweepd demo``: the main job end to end against the built-in simulator."""

from __future__ import annotations

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--dir", default="demo-output",
        help="folder for the demo's plans and results (default ./demo-output)",
    )


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from acquire.demo.run import run_demo

    return run_demo(Path(args.dir))
