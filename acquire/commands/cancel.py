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
    import time

    from acquire.soak.cancel import cancel_without_daemon, who
    from acquire.soak.spool import ACTIVE_STATES, Spool

    spool = Spool(args.spool).require()
    job = spool.find(args.job)
    state = job.read_state().get("state")
    if state not in ACTIVE_STATES:
        print(f"job {job.id} is already {state}")
        return 0
    job.request_cancel(who())
    if spool.daemon_pid() is None and cancel_without_daemon(spool, job):
        print(f"job {job.id} cancelled (sweepd serve was not running)")
        return 0
    deadline = time.monotonic() + max(0.0, args.wait)
    while time.monotonic() < deadline:
        state = job.read_state().get("state")
        if state not in ACTIVE_STATES:
            print(f"job {job.id} {state}")
            return 0
        time.sleep(0.1)
    print(f"job {job.id}: cancel requested; sweepd serve stops it after the sweep in flight")
    return 0
