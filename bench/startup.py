"""Start-up cost of the command line: `sweepd --help` against a bare interpreter.

Prints the median wall time of each over repeated runs and their difference, which is
what sweepd itself adds (the target: `sweepd --help` under 100 ms in total, i.e. no heavy
imports at start-up).
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import time
from pathlib import Path

RUNS = 15


def median_seconds(argv: list[str]) -> float:
    times = []
    for _ in range(RUNS):
        t0 = time.perf_counter()
        subprocess.run(argv, check=True, stdout=subprocess.DEVNULL)
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> None:
    sweepd = Path(sys.executable).with_name("sweepd")
    bare = median_seconds([sys.executable, "-c", "pass"])
    help_ = median_seconds([str(sweepd), "--help"])
    run_help = median_seconds([str(sweepd), "run", "--help"])
    print(f"{'command':28s} {'median ms':>10s}")
    print(f"{'python -c pass':28s} {bare * 1e3:10.1f}")
    print(f"{'sweepd --help':28s} {help_ * 1e3:10.1f}")
    print(f"{'sweepd run --help':28s} {run_help * 1e3:10.1f}")
    print(f"sweepd --help costs {help_ / bare:.2f}x a bare interpreter "
          f"({(help_ - bare) * 1e3:.1f} ms of its own); target: under 100 ms in total")


if __name__ == "__main__":
    main()
