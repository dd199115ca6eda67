"""Touchstone write/read speed: sweepd against scikit-rf, side by side in one run.

    .venv/bin/python bench/touchstone_io.py [--repeat 15]

For 1,601 and 10,001 points, 1-port and 2-port, RI format, it prints the best-of-N time
of each library writing its own file and of both reading the same file, with the
ratios (scikit-rf time / sweepd time; above 1 means sweepd is faster). "write" for
sweepd is the public write_touchstone (temp file, fsync, hard link); "format" is the
text alone. It also prints the worst relative error of sweepd's default precision
after a round trip, which must stay below 1e-12.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from acquire.sweep import Sweep
from acquire.touchstone import (
    format_touchstone,
    read_touchstone,
    write_touchstone,
)


def best(repeat: int, func) -> tuple[float, object]:
    """Best wall time over ``repeat`` calls, and the last result."""
    times, result = [], None
    for _ in range(repeat):
        start = time.perf_counter()
        result = func()
        times.append(time.perf_counter() - start)
    return min(times), result


def make_sweep(points: int, ports: int) -> Sweep:
    """A plausible measured sweep: 10 MHz to 6 GHz (a non-integer grid), noisy data."""
    rng = np.random.default_rng(points * 10 + ports)
    freq = np.linspace(10e6, 6e9, points)
    s = 0.3 * (rng.normal(size=(points, ports, ports))
               + 1j * rng.normal(size=(points, ports, ports)))
    return Sweep(freq, s, (50.0,) * ports, {"plan": "bench", "serial": "B0001"})


def run_case(folder: Path, points: int, ports: int, repeat: int) -> dict[str, float]:
    import skrf as rf

    sweep = make_sweep(points, ports)
    net = rf.Network(frequency=rf.Frequency.from_f(sweep.freq_hz, unit="hz"), s=sweep.s, z0=50)
    ours_file = folder / f"ours-{points}-{ports}.s{ports}p"
    sk_stem = folder / f"skrf-{points}-{ports}"
    counter = iter(range(10**6))

    def ours_write() -> Path:
        return write_touchstone(folder / f"w{next(counter)}.s{ports}p", sweep)

    t_write, path = best(repeat, ours_write)
    t_format, _ = best(repeat, lambda: format_touchstone(sweep))
    path.rename(ours_file)
    t_sk_write, _ = best(repeat, lambda: net.write_touchstone(str(sk_stem), form="ri"))
    sk_file = sk_stem.with_suffix(f".s{ports}p")
    t_read, back = best(repeat, lambda: read_touchstone(ours_file))
    t_sk_read, _ = best(repeat, lambda: rf.Network(str(ours_file)))
    t_read_sk, _ = best(repeat, lambda: read_touchstone(sk_file))
    t_sk_read_sk, _ = best(repeat, lambda: rf.Network(str(sk_file)))
    rel = np.abs(back.data - sweep.s) / np.maximum(np.abs(sweep.s), 1e-300)
    return {"write": t_write, "format": t_format, "sk_write": t_sk_write, "read": t_read,
            "sk_read": t_sk_read, "read_sk": t_read_sk, "sk_read_sk": t_sk_read_sk,
            "rel_err": float(rel.max()),
            "freq_err": float(np.max(np.abs(back.freq_hz - sweep.freq_hz) / sweep.freq_hz))}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=15)
    args = parser.parse_args()
    warnings.simplefilter("ignore")
    ms = 1e3
    print("times in ms, best of", args.repeat, "| ratio = scikit-rf / sweepd")
    print(f"{'case':>14} | {'write':>6} {'format':>6} {'skrf':>7} {'ratio':>6} | "
          f"{'read':>6} {'skrf':>7} {'ratio':>6} | {'read skrf file':>14} {'skrf':>7} "
          f"{'ratio':>6} | {'rel err':>8}")
    with tempfile.TemporaryDirectory() as tmp:
        for points in (1601, 10001):
            for ports in (1, 2):
                r = run_case(Path(tmp), points, ports, args.repeat)
                print(f"{points:>6} pts {ports}-port | {r['write'] * ms:6.1f} "
                      f"{r['format'] * ms:6.1f} {r['sk_write'] * ms:7.1f} "
                      f"{r['sk_write'] / r['write']:5.1f}x | {r['read'] * ms:6.1f} "
                      f"{r['sk_read'] * ms:7.1f} {r['sk_read'] / r['read']:5.1f}x | "
                      f"{r['read_sk'] * ms:14.1f} {r['sk_read_sk'] * ms:7.1f} "
                      f"{r['sk_read_sk'] / r['read_sk']:5.1f}x | {r['rel_err']:8.1e}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
