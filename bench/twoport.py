#!/usr/bin/env python3
"""Full two-port calibration per sweep, side by side with scikit-rf on the same data.

    .venv/bin/python bench/twoport.py [--points 201,1601,10001,100001] [--seconds 0.5]
                                      [--rounds 3]

For each sweep size, on the simulator's error box (noise-free):

- solve: ``solve("two-port", ...)`` from the raw standards (OSL at both ports, thru,
  isolation) — once per calibration;
- correct: ``ErrorModel.correct`` of one raw two-port sweep — once per measured unit;
- skrf solve / skrf correct: ``skrf.calibration.TwelveTerm`` run and ``apply_cal`` on the
  same raw data (scikit-rf is a test dependency; it is never used at runtime).

Each cell is the median time per call over about ``--seconds``, best of ``--rounds``
(other load on a shared machine only ever adds time). Target: correction of a sweep no
slower than scikit-rf's (ratio ≤ 1), since a production line corrects every unit.
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
import skrf as rf
from skrf.calibration import TwelveTerm

from acquire.calibration import load_kit, solve
from acquire.sweep import Sweep
from simulators.bench import Bench

KIT = load_kit("generic-sma-50")


def _time(call: Callable[[], object], seconds: float, rounds: int) -> float:
    call()
    best = float("inf")
    for _ in range(rounds):
        times, end = [], time.perf_counter() + seconds
        while time.perf_counter() < end or len(times) < 3:
            t0 = time.perf_counter()
            call()
            times.append(time.perf_counter() - t0)
        best = min(best, statistics.median(times))
    return best


def _case(points: int):
    f = np.linspace(10e6, 6e9, points)
    bench = Bench(noise=False, device="cable-1m")
    raw, nets = {}, []
    for name in ("open", "short", "load", "thru"):
        bench.connect(name)
        m = bench.sweep(f)
        nets.append(m)
        if name == "thru":
            raw.update({f"thru.S{i + 1}{j + 1}": m[:, i, j] for i in range(2) for j in range(2)})
        else:
            raw[f"{name}.S11"], raw[f"{name}.S22"] = m[:, 0, 0], m[:, 1, 1]
    raw["load.S21"], raw["load.S12"] = nets[2][:, 1, 0], nets[2][:, 0, 1]
    bench.connect("device")
    return f, raw, nets, bench.sweep(f), bench


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", default="201,1601,10001,100001")
    parser.add_argument("--seconds", type=float, default=0.5)
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args()
    print(f"{'points':>8} {'solve ms':>9} {'skrf ms':>9} {'ratio':>6} {'correct ms':>11} "
          f"{'skrf ms':>9} {'ratio':>6}")
    for points in (int(p) for p in args.points.split(",")):
        f, raw, nets, device, bench = _case(points)
        freq = rf.Frequency.from_f(f, unit="Hz")
        measured = [rf.Network(frequency=freq, s=m, z0=50) for m in nets]
        ideals = [rf.Network(frequency=freq, s=bench.standard(n, f), z0=50)
                  for n in ("open", "short", "load", "thru")]
        iso = rf.Network(frequency=freq, s=np.where(np.eye(2, dtype=bool), 0, nets[2]), z0=50)
        model = solve("two-port", f, raw, KIT, isolation="load.S21").model
        cal = TwelveTerm(measured=measured, ideals=ideals, n_thrus=1, isolation=iso)
        cal.run()
        sweep, dut = Sweep(f, device), rf.Network(frequency=freq, s=device, z0=50)
        ours_s = _time(lambda f=f, raw=raw: solve("two-port", f, raw, KIT,
                                                  isolation="load.S21"), args.seconds,
                       args.rounds)
        skrf_s = _time(lambda m=measured, i=ideals, iso=iso: TwelveTerm(
            measured=m, ideals=i, n_thrus=1, isolation=iso).run(), args.seconds, args.rounds)
        ours_c = _time(lambda m=model, s=sweep: m.correct(s), args.seconds, args.rounds)
        skrf_c = _time(lambda c=cal, d=dut: c.apply_cal(d), args.seconds, args.rounds)
        print(f"{points:>8} {ours_s * 1e3:>9.2f} {skrf_s * 1e3:>9.2f} {ours_s / skrf_s:>6.2f} "
              f"{ours_c * 1e3:>11.3f} {skrf_c * 1e3:>9.3f} {ours_c / skrf_c:>6.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
