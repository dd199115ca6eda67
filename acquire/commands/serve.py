"""``sweepd serve [--spool DIR]``: run soak jobs in the foreground (for systemd).

Logs go to stderr, one event per line with its level. On a terminal a progress line per
running job appears every few seconds; under systemd (no terminal) only the log lines.
SIGTERM or SIGINT stop it after the sweeps in flight; the jobs resume when it starts again.
"""

from __future__ import annotations

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_spool_argument(parser)
    parser.add_argument("--until-idle", action="store_true",
                        help="exit once no queued or running job is left (scripts, tests)")
    parser.add_argument("-q", "--quiet", action="store_true",
                        help="log warnings and errors only (default: one line per event)")


def add_spool_argument(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--spool", metavar="DIR",
                        help="spool folder (default $SWEEPD_SPOOL, else "
                             "~/.local/state/sweepd/spool)")


def run(args: argparse.Namespace) -> int:
    import logging

    from acquire.soak.daemon import Daemon
    from acquire.soak.spool import Spool

    level = logging.WARNING if args.quiet else (logging.DEBUG if args.verbose else logging.INFO)
    logging.getLogger("acquire").setLevel(level)
    return Daemon(Spool(args.spool), until_idle=args.until_idle).serve()
