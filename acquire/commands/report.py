"""``sweepd report JOB [-o DIR]``: the morning's answer for a soak job.

Plots of the tracked metrics over time with alarms and faults marked, the Allan deviation
of the resonance, the deviation from the reference against frequency (max envelope), and
a short text and HTML summary. Works while the job runs (a snapshot) and after.
"""

from __future__ import annotations

import argparse

from acquire.commands.serve import add_spool_argument


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("job", help="job id (or a prefix naming one job)")
    parser.add_argument("-o", "--output", metavar="DIR",
                        help="report folder (default: <job data folder>/report)")
    add_spool_argument(parser)


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from acquire.soak.report import write_report
    from acquire.soak.spool import Spool

    spool = Spool(args.spool).require()
    job = spool.find(args.job)
    out = Path(args.output) if args.output else job.data_dir / "report"
    report = write_report(job, out)
    print(report.text)
    print(f"\nreport: {report.html}")
    return 0
