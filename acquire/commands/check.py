"""``sweepd check FILE.sNp --mask MASK``: judge a Touchstone file offline.

Any Touchstone file (ours or another tool's) is read, turned into a sweep and judged by
the same code a capture uses, so the verdict is the one given at capture time. Exit
code 0 pass, 1 fail, 2 error.
"""

from __future__ import annotations

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", help="Touchstone file (.s1p, .s2p, ..., .ts)")
    parser.add_argument(
        "--mask", action="append", default=[], metavar="MASK",
        help="mask name (shipped or in the current folder) or path; repeat for several",
    )
    parser.add_argument(
        "--plan", metavar="PLAN", help="also apply the checks of this plan (YAML)",
    )
    parser.add_argument("--json", action="store_true", help="print the verdict as JSON")
    parser.epilog = "Exit codes: 0 pass, 1 fail, 2 error."


def run(args: argparse.Namespace) -> int:
    from acquire.commands.jsonout import run_with_json_errors

    return run_with_json_errors(args, "check", lambda: _run(args))


def _run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from acquire.check_parse import any_mask_check
    from acquire.checks import Check, evaluate_checks
    from acquire.errors import ConfigError

    checks: list[Check] = [any_mask_check(ref, Path.cwd()) for ref in args.mask]
    if args.plan:
        from acquire.plan import load_plan

        checks += list(load_plan(args.plan).checks)
    if not checks:
        raise ConfigError("check: nothing to judge against; give --mask MASK or --plan PLAN")
    sweep = read_sweep(args.file)
    verdict = evaluate_checks(checks, sweep, source=str(args.file))
    if args.json:
        print(verdict.to_json())
    else:
        lines = verdict.report_lines()
        lines[0] = f"{args.file}: {lines[0].removeprefix('verdict: ')}"
        lines.append(f"  {verdict.metrics_line()}")
        print("\n".join(lines))
    return verdict.exit_code


def read_sweep(path: str):
    """Read any Touchstone file into a ``Sweep`` (errors name the file and line)."""
    from acquire.touchstone import read_touchstone

    return read_touchstone(path).to_sweep()
