#!/usr/bin/env python3
"""Per-point uncertainty per sweep, side by side with the correction it accompanies.

    .venv/bin/python bench/uncertainty.py [--points 201,1601,10001] [--repeat 5]

For each sweep size, with the shipped kit's models and the default budget:

- correct: the one-port correction of the raw device reading (what every capture does);
- U, mismatched: ``reflection_uncertainty`` of a device at |Γ| = 0.3 (law of
  propagation only);
- U, matched: the same at |Γ| = 0 (every point near a match: the 95 % radius from the
  inputs' distributions, 4,096 fixed draws per point).

Then one line for a full two-port capture of ``--full-points`` (1,601) points: the
12-term correction of its four parameters against ``full_two_port_uncertainty`` of a
matched cable (|S11|, |S22| near a match, |S21| 0.9), which solves the whole
calibration again twice per input (central differences).

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
    parser.add_argument("--full-points", type=int, default=1601)
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
    _full_two_port_line(kit, budget, args.full_points, args.repeat)
    return 0


def _full_two_port_line(kit: object, budget: Budget, points: int, repeat: int) -> None:
    from acquire.calibration.twoport import _from_eight_term, correct_twelve
    from acquire.uncertainty.fulltwoport import DEFINED, FullSetup, full_two_port_uncertainty

    f = np.linspace(10e6, 6e9, points)
    w = 2 * np.pi * f

    def term(mag: float, delay: float, phase: float) -> np.ndarray:
        return mag * np.exp(1j * phase - 1j * w * delay)

    terms = _from_eight_term(
        OnePortTerms(term(0.05, 0.3e-9, 0), term(0.15, 0.5e-9, 1), term(0.7, 3e-9, 2)),
        OnePortTerms(term(0.04, 0.2e-9, 0.5), term(0.12, 0.4e-9, 2), term(0.75, 3e-9, 0.3)),
        term(0.7, 5e-9, 1), term(0.2, 1e-9, 0), term(0.15, 1.2e-9, 1), 0 * w + 0j, 0 * w + 0j)
    cable = np.empty((points, 2, 2), np.complex128)
    cable[:, 0, 0] = cable[:, 1, 1] = term(0.01, 1e-9, 0)
    cable[:, 1, 0] = cable[:, 0, 1] = term(0.9, 5e-9, 0)
    names = {"open": "open", "short": "short", "load": "load", "thru": "thru"}
    setup = FullSetup(DEFINED, kit, f, names, terms, cable, isolation=True)
    raw = terms.embed(cable)
    t_cor = _best(lambda: correct_twelve(terms, raw), repeat)
    t_unc = _best(lambda: full_two_port_uncertainty(setup, budget), min(repeat, 3))
    print(f"full two-port, {points} points: correct {t_cor * 1e3:.3f} ms, U of S11, S21, S12, "
          f"S22 {t_unc * 1e3:.1f} ms, ratio {t_unc / t_cor:.0f}")


if __name__ == "__main__":
    sys.exit(main())
