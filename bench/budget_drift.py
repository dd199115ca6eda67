"""Time of the soak report's drift figure (``acquire.soak.budget_drift``) by soak size.

    .venv/bin/python bench/budget_drift.py [--rounds 3]

For three soaks (one night at 1/min with 201 and 1601 points, 16 h at one sweep every
10 s with 1601 points) of white noise plus drift, printed side by side: the whole
estimate as shipped (each lag a slice of one array on the full grid of sweep indices,
per-point sums for the jackknife), the same lags' structure function by gathering the
pairs' rows (the first version), and their ratio. Best of ``--rounds`` (other load on a
shared machine only ever adds time). Goal: the largest soak under 5 s, so the morning
report stays quick. Measured on the 2-core machine: 0.02 s, 0.25 s and 2.6 s; the
gathering version was as fast at the largest size (ratio 1.0 to 2.3), so the slices are
kept for the per-point sums they give the jackknife at no extra cost, not for speed (an
earlier single reading of 9 s for the gathering version was taken on a loaded machine).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

SIZES = ((720, 201, 60.0), (720, 1601, 60.0), (5760, 1601, 10.0))


def series(sweeps: int, points: int, every_s: float) -> tuple[np.ndarray, ...]:
    rng = np.random.default_rng(1)
    t = np.arange(sweeps) * every_s
    drift = 5e-4 / 3600 * np.exp(2j * np.pi * rng.random(points))
    noise = 1e-4 * (rng.standard_normal((sweeps, points))
                    + 1j * rng.standard_normal((sweeps, points)))
    return 0.3 + t[:, None] * drift + noise, np.arange(sweeps), t


def gathered(values: np.ndarray, seq: np.ndarray, lags: np.ndarray) -> list[float]:
    """The first version: each lag's pairs found by search, their rows gathered."""
    found = []
    for lag in lags:
        j = np.searchsorted(seq, seq + lag)
        i = np.flatnonzero(j < seq.size)
        j = j[i]
        keep = seq[j] == seq[i] + lag
        i, j = i[keep], j[keep]
        total = 0.0
        for start in range(0, i.size, 256):
            diff = values[j[start:start + 256]] - values[i[start:start + 256]]
            total += float(np.sum(diff.real ** 2 + diff.imag ** 2))
        found.append(total / (i.size * values.shape[1]))
    return found


def best(fn, rounds: int, *args: object) -> float:
    times = []
    for _ in range(rounds):
        t0 = time.perf_counter()
        fn(*args)
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> None:
    from acquire.soak.budget_drift import estimate_drift, lag_steps
    from acquire.soak.statistics import Minimums

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args()
    print(f"{'sweeps':>7} {'points':>7} {'shipped s':>10} {'gathered s':>11} {'ratio':>6}")
    for sweeps, points, every_s in SIZES:
        values, seq, t = series(sweeps, points, every_s)
        lags = lag_steps(sweeps - 1)
        ours = best(estimate_drift, args.rounds, values, seq, t, Minimums())
        first = best(gathered, args.rounds, values, seq, lags)
        print(f"{sweeps:>7} {points:>7} {ours:>10.3f} {first:>11.3f} {first / ours:>6.1f}")


if __name__ == "__main__":
    main()
