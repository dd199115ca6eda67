#!/usr/bin/env python3
"""Journal cost per capture, side by side: the station's own SQLite file, the shared
PostgreSQL store written directly, and the station file with its outbox forwarded to the
store after each write (what a station on a line does).

    .venv/bin/python bench/journal_store.py [--url postgresql://user@host/db] [--captures 200]

A capture is what a station journals per unit: ``plan_measurement`` (pending), then
``store_measurement`` (stored), i.e. two committed transactions. Each column is the
median time per capture over ``--captures`` captures, best of ``--rounds`` rounds. The
database at ``--url`` gets one run per round (use a scratch database). No target: the
numbers say what a line pays for a shared store beside a unit's sweep and files.
Without ``--url`` a throwaway local cluster is started (``tests/pg_cluster.py``; needs
the PostgreSQL server programs).
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
sys.path[:0] = [str(ROOT), str(ROOT / "tests")]


def per_capture(journal: Any, folder: Path, captures: int) -> float:
    from acquire.journal import StoredFields

    run = journal.start_run("station", "bench", station="bench-1")
    times = []
    for seq in range(captures):
        path = folder / f"u{seq}.s1p"
        start = time.perf_counter()
        planned = journal.plan_measurement(run, seq, path, serial=f"PA-{seq:05d}")
        journal.store_measurement(planned, touchstone=path, summary=None,
                                  raw_touchstone=None,
                                  fields=StoredFields(verdict="pass", exit_code=0))
        times.append(time.perf_counter() - start)
    journal.end_run(run)
    return statistics.median(times)


def best(open_one: Callable[[Path], Any], captures: int, rounds: int) -> float:
    results = []
    for _ in range(rounds):
        with tempfile.TemporaryDirectory() as tmp, open_one(Path(tmp)) as journal:
            results.append(per_capture(journal, Path(tmp), captures))
    return min(results)


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--url", help="a scratch postgresql:// database (default: a "
                        "throwaway local cluster)")
    parser.add_argument("--captures", type=int, default=200)
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args(argv)
    with _database(args.url) as url:
        return _compare(url, args.captures, args.rounds)


@contextmanager
def _database(url: str | None) -> Iterator[str]:
    if url:
        yield url
        return
    import shutil

    from pg_cluster import Cluster

    folder = Path(tempfile.mkdtemp(prefix="sweepd-pg-bench-"))
    cluster = Cluster(folder)
    try:
        cluster.init()
        cluster.start()
        yield cluster.create_database("bench")
    finally:
        cluster.stop("immediate")
        shutil.rmtree(folder, ignore_errors=True)


def _compare(url: str, captures: int, rounds: int) -> int:
    from acquire.journal import open_journal, station_origin
    from acquire.journal.outbox import OutboxJournal

    ways = {
        "station file": lambda folder: open_journal(folder / "journal.sqlite"),
        "store direct": lambda folder: open_journal(url),
        "file + outbox": lambda folder: OutboxJournal(folder, url,
                                                      origin=station_origin(folder)),
    }
    medians = {name: best(way, captures, rounds) for name, way in ways.items()}
    base = medians["station file"]
    print(f"{'journal':<16}{'ms/capture':>12}{'x file':>9}")
    for name, value in medians.items():
        print(f"{name:<16}{value * 1e3:>12.2f}{value / base:>9.1f}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
