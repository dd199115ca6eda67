#!/usr/bin/env python3
"""Distance to fault per sweep, side by side with the bare FFT it cannot beat.

    .venv/bin/python bench/dtf.py [--points 201,1001,10001,100001] [--seconds 0.5]
                                  [--rounds 3]

For each sweep size, on the same synthetic reflection (two mismatches on a line):

- floor: one ``numpy.fft.ifft`` of the same zero-padded length, nothing else;
- transform: ``distance_profile`` (window, padded inverse FFT, distance axis, levels);
- dtf: ``distance_profile`` plus ``find_peaks`` (what a distance check does per sweep).

Each cell is the median time per call over about ``--seconds``, best of ``--rounds``
(other load on a shared machine only ever adds time). Target: dtf within 4x the floor
from 1,001 points up (window measurement is cached; the rest is a handful of vectorised
passes over the padded trace).
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numpy as np

from acquire.timedomain.distance import C0, LineSettings, distance_profile
from acquire.timedomain.peaks import find_peaks
from acquire.timedomain.transform import TransformSettings

VF = 0.66


def _sweep(points: int) -> tuple[np.ndarray, np.ndarray]:
    f = np.linspace(1e6, 1e9, points)
    v = C0 * VF
    g = sum(r * np.exp(-2j * np.pi * f * 2 * d / v) for r, d in ((0.1, 3.0), (0.03, 7.5)))
    return f, np.asarray(g, dtype=np.complex128)


def _time(call: Callable[[], object], seconds: float, rounds: int) -> float:
    call()  # warm-up (caches, imports)
    best = float("inf")
    for _ in range(rounds):
        times, end = [], time.perf_counter() + seconds
        while time.perf_counter() < end or len(times) < 3:
            t0 = time.perf_counter()
            call()
            times.append(time.perf_counter() - t0)
        best = min(best, statistics.median(times))
    return best


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", default="201,1001,10001,100001")
    parser.add_argument("--seconds", type=float, default=0.5)
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args()
    settings, line = TransformSettings(), LineSettings(VF)
    print(f"{'points':>8} {'n_fft':>9} {'floor ms':>9} {'transform':>10} {'dtf ms':>9} "
          f"{'dtf/floor':>9}")
    for points in (int(p) for p in args.points.split(",")):
        f, g = _sweep(points)
        profile = distance_profile(f, g, line, settings)
        n_fft = profile.response.n_fft
        floor = _time(lambda g=g, n=n_fft: np.fft.ifft(g, n), args.seconds, args.rounds)
        trans = _time(lambda f=f, g=g: distance_profile(f, g, line, settings), args.seconds,
                      args.rounds)
        dtf = _time(lambda f=f, g=g: find_peaks(distance_profile(f, g, line, settings)),
                    args.seconds, args.rounds)
        print(f"{points:>8} {n_fft:>9} {floor * 1e3:>9.3f} {trans * 1e3:>10.3f} "
              f"{dtf * 1e3:>9.3f} {dtf / floor:>9.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
