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
    parser.add_argument("--json", action="store_true",
                        help="print where the report went and its summary as one JSON object")
    add_spool_argument(parser)


def run(args: argparse.Namespace) -> int:
    from acquire.commands.jsonout import run_with_json_errors

    return run_with_json_errors(args, "report", lambda: _run(args))


def _run(args: argparse.Namespace) -> int:
    import json

    from acquire.commands import cli_path
    from acquire.soak.report import report_document, write_report
    from acquire.soak.spool import Spool

    spool = Spool(args.spool).require()
    job = spool.find(args.job)
    out = cli_path(args.output) if args.output else job.data_dir / "report"
    report = write_report(job, out)
    if args.json:
        print(json.dumps(report_document(job, report)))
        return 0
    print(report.text)
    print(f"\nreport: {report.html}")
    return 0
