"""``sweepd cancel JOB``: stop a job cleanly after the sweep in flight."""

from __future__ import annotations

import argparse

from acquire.commands.serve import add_spool_argument


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("job", help="job id (or a prefix naming one job)")
    parser.add_argument("--wait", type=float, default=30.0, metavar="SECONDS",
                        help="how long to wait for the daemon to confirm (default 30)")
    add_spool_argument(parser)


def run(args: argparse.Namespace) -> int:
    from acquire.soak.cancel import cancel_job
    from acquire.soak.spool import Spool

    spool = Spool(args.spool).require()
    print(cancel_job(spool, spool.find(args.job), args.wait))
    return 0
