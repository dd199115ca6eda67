"""``--resource`` on any command goes through the rules plans follow (drivers.resources).

Run by the CLI before the command itself; with ``--json`` a refusal is the usual error
document on stdout (and one line on stderr), otherwise the one-line error is raised.
"""

from __future__ import annotations

import argparse


def run(args: argparse.Namespace) -> int:
    """0 when ``args.resource`` is acceptable; 2 after printing the JSON error document."""
    from acquire.commands.jsonout import run_with_json_errors
    from drivers.resources import parse_resource

    def check() -> int:
        parse_resource(args.resource, where="--resource")
        return 0

    return run_with_json_errors(args, args.command, check)
