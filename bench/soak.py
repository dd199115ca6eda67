"""A 10,000-sweep soak at full speed against the simulator: sweeps per second and memory.

    .venv/bin/python bench/soak.py [--sweeps N] [--points N]

The simulator runs as a child process (TCP, no waiting, noise on, drift on); the soak
worker runs here, exactly as ``sweepd serve`` runs it (journal, drift records, status
file, every 1000th sweep kept, the patch mask judged on every sweep). Printed side by
side: the bare driver loop (trigger and read only) and the soak, as sweeps per second and
their ratio, and this process's resident memory after the first 200 sweeps and at the
end. The soak keeps no per-sweep state in memory beyond one float per sweep for the
Allan deviation, so the growth should stay far under 10 MB.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import threading
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def rss_mb() -> float:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1]) / 1024.0
    return float("nan")


def plan_text(resource: str, out: Path, sweeps: int, points: int) -> str:
    return f"""plan: bench-soak
instrument: {{resource: "{resource}", timeout: 5 s}}
stimulus: {{start: 2.30 GHz, stop: 2.60 GHz, points: {points}, power: -10 dBm,
            if_bandwidth: 100 kHz}}
checks: [{{mask: patch-2g45}}]
output: {{dir: "{out}"}}
schedule: {{every: 0 s, count: {sweeps}}}
soak:
  band: [2.40 GHz, 2.50 GHz]
  keep: {{every: 1000, failing: false, over_threshold: false}}
  alarms: {{resonance_shift: 50 MHz}}
"""


def bare_rate(resource: str, points: int, n: int = 500) -> float:
    from drivers.analyzer import Analyzer
    from drivers.dialect import load_dialect
    from drivers.stimulus import Stimulus

    with Analyzer(resource, load_dialect("scpi-generic")) as an:
        an.configure(Stimulus(2.30e9, 2.60e9, points, -10.0, 100e3))
        an.sweep(["S11"])
        t0 = time.perf_counter()
        for _ in range(n):
            an.sweep(["S11"])
        return n / (time.perf_counter() - t0)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sweeps", type=int, default=10_000)
    parser.add_argument("--points", type=int, default=201)
    args = parser.parse_args()

    from acquire.plan import load_plan
    from acquire.soak.spool import Spool
    from acquire.soak.worker import SoakWorker
    from simulators.process import SimProcess

    with tempfile.TemporaryDirectory() as tmp, \
            SimProcess(["--time-scale", "0", "--seed", "5"]) as sim:
        root = Path(tmp)
        from simulators.control import SimControl

        with SimControl(*sim.control) as control:
            control.drift(rate_hz_per_s=100.0, jitter_hz=2e3)
        bare = bare_rate(sim.tcp_resource, args.points)
        path = root / "bench-soak.yaml"
        path.write_text(plan_text(sim.tcp_resource, root / "out", args.sweeps, args.points))
        plan = load_plan(path)
        job = Spool(root / "spool").create_job(plan.name, path, path.read_text(),
                                               root / "out", sim.tcp_resource)
        worker = SoakWorker(job)
        thread = threading.Thread(target=worker.run)
        t0 = time.perf_counter()
        thread.start()
        start_rss = None
        peak = 0.0
        while thread.is_alive():
            thread.join(0.5)
            done = sum(worker.tally.get(s, 0) for s in ("stored", "measured"))
            peak = max(peak, rss_mb())
            if start_rss is None and done >= 200:
                start_rss, start_done, start_t = rss_mb(), done, time.perf_counter()
        elapsed = time.perf_counter() - t0
        end_rss = rss_mb()
        done = sum(worker.tally.get(s, 0) for s in ("stored", "measured"))
        steady = (done - start_done) / (time.perf_counter() - start_t) if start_rss else 0.0
        kept = len(list(job.data_dir.glob("*.s1p")))
    soak_rate = done / elapsed
    print(f"soak bench: {done} of {args.sweeps} sweeps, {args.points} points, state "
          f"{worker.state}, {kept} kept, {worker.tally.get('missed', 0)} missed")
    print(f"  bare driver loop          {bare:9.1f} sweeps/s")
    print(f"  soak worker (whole run)   {soak_rate:9.1f} sweeps/s  "
          f"(ratio soak/bare {soak_rate / bare:.3f})")
    print(f"  soak worker (after 200)   {steady:9.1f} sweeps/s")
    if start_rss is not None:
        print(f"  resident memory           {start_rss:9.1f} MB after 200 sweeps, "
              f"{end_rss:.1f} MB at the end (growth {end_rss - start_rss:+.1f} MB, "
              f"peak {peak:.1f} MB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
