"""``sweepd check FILE.sNp --mask MASK``: judge a Touchstone file offline.

Any Touchstone file (ours or another tool's) is read, turned into a sweep and judged by
the same code a capture uses, so the verdict is the one given at capture time. With
``--plan``, the plan's decision rule applies; guarded acceptance takes the uncertainty
from the capture JSON beside the file. Exit code 0 pass, 1 fail, 2 error,
3 indeterminate.
"""

from __future__ import annotations

import argparse

MARKER_HELP = ("marker at a frequency (2.45GHz) or a feature: min, max, edges (SWR 2 band "
               "of a reflection, -3 dB band of a transmission), swr=LEVEL or db=LEVEL (each "
               "crossing); put a parameter first for another trace (S21:max); repeat for "
               "several. Each marker's value is printed in every quantity.")


def add_marker_argument(parser: argparse.ArgumentParser) -> None:
    """``--marker SPEC`` (repeatable), shared by plot and check."""
    parser.add_argument("--marker", action="append", default=[], metavar="SPEC",
                        help=MARKER_HELP)


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
    add_marker_argument(parser)
    parser.epilog = "Exit codes: 0 pass, 1 fail, 2 error, 3 indeterminate (guarded plans)."


def run(args: argparse.Namespace) -> int:
    from acquire.commands.jsonout import run_with_json_errors

    return run_with_json_errors(args, "check", lambda: _run(args))


def _run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from acquire.check_parse import any_mask_check
    from acquire.checks import Check, evaluate_checks
    from acquire.errors import ConfigError
    from acquire.metrics.markers import sweep_markers

    checks: list[Check] = [any_mask_check(ref, Path.cwd()) for ref in args.mask]
    decision = None
    if args.plan:
        from acquire.plan import load_plan

        plan = load_plan(args.plan)
        if not plan.checks:
            raise ConfigError(f"check: plan {args.plan} has no checks (its checks: section "
                              "is missing or empty); add some, or give --mask MASK")
        checks += list(plan.checks)
        decision = plan.decision
    if not checks and not args.marker:  # markers alone: their values, verdict "none"
        raise ConfigError("check: nothing to judge against; give --mask MASK, --plan PLAN "
                          "or --marker SPEC")
    sweep = read_sweep(args.file)
    readouts = sweep_markers(sweep, args.marker)
    from acquire.uncertainty.capture import from_summary

    verdict = evaluate_checks(checks, sweep, source=str(args.file), decision=decision,
                              uncertainty=from_summary(sweep, Path(args.file)))
    if args.json:
        print(_with_markers(verdict.to_json(), readouts))
    else:
        lines = verdict.report_lines()
        lines[0] = f"{args.file}: {lines[0].removeprefix('verdict: ')}"
        lines.append(f"  {verdict.metrics_line()}")
        lines.extend(f"  marker {r.line()}" for r in readouts)
        print("\n".join(lines))
    return verdict.exit_code


def _with_markers(document: str, readouts: list) -> str:
    """The verdict JSON with a ``markers`` list added when markers were asked for."""
    if not readouts:
        return document
    import json

    data = json.loads(document)
    data["markers"] = [r.to_dict() for r in readouts]
    return json.dumps(data, indent=2, allow_nan=False, ensure_ascii=True)


def read_sweep(path: str):
    """Read any Touchstone file into a ``Sweep`` (errors name the file and line)."""
    from acquire.touchstone import read_touchstone

    return read_touchstone(path).to_sweep()
