"""Run a batch of fuzz cases through the real entry points, in one process, and report.

    python tests/fuzz_harness.py CASES.json

Each case is ``{"kind": ..., "argv": [...]}`` (the ``sweepd`` command line, run through
``acquire.cli.main``) or ``{"kind": ..., "load": "<loader>", "path": ...}`` (a loader
the daemon or station calls without a command of its own). One JSON line per case goes
to stdout: ``{"code": int, "stderr": str}``, or ``{"crash": traceback}`` when anything
other than a one-line sweepd error escaped, or ``{"hang": seconds}`` when a case ran
past its time. The test runs this under a memory cap (RLIMIT_AS) and a timeout.
"""

from __future__ import annotations

import contextlib
import io
import json
import logging
import signal
import sys
import traceback
from pathlib import Path
from typing import Any

CASE_SECONDS = 20


class _Hang(BaseException):
    """Raised by the alarm: a case ran past CASE_SECONDS."""


def _alarm(_signum, _frame) -> None:
    raise _Hang


def run_cli(argv: list[str]) -> dict[str, Any]:
    from acquire.cli import main

    err, out = io.StringIO(), io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(out):
        try:
            code = main(argv)
        except SystemExit as exc:  # argparse
            code = exc.code if isinstance(exc.code, int) else 2
    return {"code": code, "stderr": err.getvalue(), "stdout": out.getvalue()[-4000:]}


def run_loader(name: str, path: str) -> dict[str, Any]:
    from drivers.errors import SweepdError

    try:
        LOADERS[name](Path(path))
    except SweepdError as exc:
        return {"code": 2, "stderr": f"sweepd: error: {exc}\n"}
    return {"code": 0, "stderr": ""}


def _kit(path: Path) -> None:
    from acquire.calibration.kit import load_kit

    load_kit(path)


def _dialect(path: Path) -> None:
    from drivers.dialect import load_dialect

    load_dialect(path)


def _calset(path: Path) -> None:
    from acquire.calibration import CalSet, find_latest, list_calsets

    list_calsets(path.parent)  # the station's and the daemon's lookup: never raises
    find_latest(path.parent, "patch-line-a")
    CalSet.load(path)


def _job(path: Path) -> None:
    from acquire.soak.spool import Job

    Job.from_dir(path).load_plan()


LOADERS = {"kit": _kit, "dialect": _dialect, "calset": _calset, "job": _job}


def run_case(case: dict[str, Any]) -> dict[str, Any]:
    signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(CASE_SECONDS)
    try:
        if "argv" in case:
            return run_cli(case["argv"])
        return run_loader(case["load"], case["path"])
    except _Hang:
        return {"hang": CASE_SECONDS}
    except BaseException:
        return {"crash": traceback.format_exc()[-2000:]}
    finally:
        signal.alarm(0)


def main() -> int:
    logging.basicConfig(handlers=[logging.NullHandler()])  # log lines are not the verdict
    cases = json.loads(Path(sys.argv[1]).read_text())
    for case in cases:
        print(json.dumps(run_case(case)), flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
