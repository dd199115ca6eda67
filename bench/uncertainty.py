#!/usr/bin/env python3
"""Per-point uncertainty per sweep, side by side with the correction it accompanies.

    .venv/bin/python bench/uncertainty.py [--points 201,1601,10001] [--repeat 5]

For each sweep size, with the shipped kit's models and the default budget:

- correct: the one-port correction of the raw device reading (what every capture does);
- U, mismatched: ``reflection_uncertainty`` of a device at |Γ| = 0.3 (law of
  propagation only);
- U, matched: the same at |Γ| = 0 (every point near a match: the 95 % radius from the
  inputs' distributions, 4,096 fixed draws per point).

Each cell is the best of ``--repeat`` timeit runs (load on a shared machine only adds
time); the ratios are to the correction in the same run.
"""

from __future__ import annotations

import argparse
import sys
import timeit
from collections.abc import Callable
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numpy as np

from acquire.calibration import OnePortTerms, load_kit
from acquire.uncertainty.budget import Budget
from acquire.uncertainty.propagate import reflection_uncertainty


def _best(call: Callable[[], object], repeat: int) -> float:
    timer = timeit.Timer(call)
    number, _ = timer.autorange()
    return min(timer.repeat(repeat, number)) / number


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", default="201,1601,10001")
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()
    kit = load_kit("generic-sma-50")
    budget = Budget(cal_age_s=3600)
    print(f"{'points':>8} {'correct ms':>11} {'U mism ms':>10} {'ratio':>7} {'U match ms':>11} "
          f"{'ratio':>7}")
    for points in (int(p) for p in args.points.split(",")):
        f = np.linspace(2.3e9, 2.6e9, points)
        w = 2 * np.pi * f
        box = OnePortTerms(0.05 * np.exp(-1j * w * 0.3e-9), 0.15 * np.exp(1j - 1j * w * 5e-10),
                           0.7 * np.exp(-1j * w * 3e-9))
        models = {k: kit.reflection(k, f) for k in ("open", "short", "load")}
        mism = 0.3 * np.exp(1j * np.linspace(0, 20, points))
        raw = box.embed(mism)
        matched = np.zeros(points, np.complex128)
        t_cor = _best(lambda raw=raw, box=box: box.correct(raw), args.repeat)
        t_mis = _best(lambda g=mism, m=models, b=box: reflection_uncertainty(
            g, m, budget, b.source_match), args.repeat)
        t_mat = _best(lambda g=matched, m=models, b=box: reflection_uncertainty(
            g, m, budget, b.source_match), args.repeat)
        print(f"{points:>8} {t_cor * 1e3:>11.3f} {t_mis * 1e3:>10.2f} {t_mis / t_cor:>7.0f} "
              f"{t_mat * 1e3:>11.2f} {t_mat / t_cor:>7.0f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
