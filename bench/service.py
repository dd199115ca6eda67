#!/usr/bin/env python3
"""Per-unit cost of measuring through the HTTP service against ``sweepd measure`` as a
process, side by side, at 201 and 1,601 points.

    .venv/bin/python bench/service.py [--points 201,1601] [--units 40] [--processes 6]

Three ways to measure the same unit on the same plan (the shipped patch-station plan, one
simulator with zero sweep time):

- bare: ``measure_one`` in this process on an open session: the work itself (sweep,
  correction, checks, files, journal), no HTTP and no process start;
- service: ``POST /api/v1/measure`` to ``sweepd serve --listen`` (its own process, one
  kept-alive HTTP connection), the way an MES calls the service;
- process: ``sweepd measure --json`` started once per unit, the way an MES calls the
  command line (imports, connect, identify, configure, then the same work).

Each cell is the median per-unit wall time. The overhead of the service is
``service - bare``: what HTTP, JSON and the instrument lock cost beyond the measurement
itself. Goal: under 20 ms.
"""

from __future__ import annotations

import argparse
import http.client
import json
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path[:0] = [str(ROOT), str(ROOT / "tests")]


def _plan(folder: Path, resource: str, points: int) -> Path:
    """The station plan at ``points``, calibrated through the analyzer's switch."""
    import io

    from test_station_support import write_plan

    from acquire.guided import Options, calibrate
    from acquire.plan import load_plan

    path = write_plan(folder, resource, name="patch-station.yaml", station={"golden": None},
                      stimulus={"start": "2.30 GHz", "stop": "2.60 GHz", "points": points,
                                "power": "-10 dBm", "if_bandwidth": "1 kHz"})
    calibrate(load_plan(path), Options(resource=resource, prompt="switch"),
              stdin=io.StringIO(""), stdout=io.StringIO())
    return path


def bare(plan_path: Path, resource: str, units: int) -> list[float]:
    from acquire.capture.session import Session
    from acquire.plan import load_plan
    from acquire.station.measure import Request, measure_one

    plan = load_plan(plan_path)
    times = []
    with Session(plan, resource) as session:
        for k in range(units):
            t0 = time.perf_counter()
            measure_one(plan, Request(serial=f"PA-{k:04d}"), session=session)
            times.append(time.perf_counter() - t0)
    return times


def service(folder: Path, units: int) -> list[float]:
    port_file = folder / "port"
    proc = subprocess.Popen([sys.executable, "-m", "acquire.cli", "serve", "--spool",
                             str(folder / "spool"), "--listen", "127.0.0.1:0", "--plans",
                             str(folder), "--port-file", str(port_file), "-q"], cwd=ROOT,
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        deadline = time.monotonic() + 60
        while not (port_file.is_file() and port_file.read_text().strip()):
            if time.monotonic() > deadline or proc.poll() is not None:
                raise SystemExit("bench: sweepd serve --listen did not start")
            time.sleep(0.05)
        conn = http.client.HTTPConnection("127.0.0.1", int(port_file.read_text()))
        times = []
        for k in range(units + 3):  # three warm-up units: the session opens on the first
            body = json.dumps({"plan": "patch-station", "serial": f"PA-{1000 + k:04d}"})
            t0 = time.perf_counter()
            conn.request("POST", "/api/v1/measure", body,
                         {"Content-Type": "application/json"})
            answer = conn.getresponse()
            data = json.loads(answer.read())
            if answer.status != 200:
                raise SystemExit(f"bench: service answered {answer.status}: {data}")
            if k >= 3:
                times.append(time.perf_counter() - t0)
        conn.close()
        return times
    finally:
        proc.terminate()
        proc.wait(30)


def process(plan_path: Path, resource: str, units: int) -> list[float]:
    times = []
    for k in range(units):
        t0 = time.perf_counter()
        done = subprocess.run([sys.executable, "-m", "acquire.cli", "measure", str(plan_path),
                               "--serial", f"PA-{2000 + k:04d}", "--resource", resource, "--json"],
                              cwd=ROOT, capture_output=True, text=True)
        times.append(time.perf_counter() - t0)
        if done.returncode not in (0, 1):
            raise SystemExit(f"bench: sweepd measure failed: {done.stderr.strip()}")
    return times


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", default="201,1601")
    parser.add_argument("--units", type=int, default=40, help="units per way (service, bare)")
    parser.add_argument("--processes", type=int, default=6, help="units as processes")
    args = parser.parse_args()
    from simulators.server import SimServer

    print(f"{'points':>7} {'bare ms':>9} {'service ms':>11} {'process ms':>11} "
          f"{'overhead ms':>12} {'process/service':>16}")
    for points in (int(p) for p in args.points.split(",")):
        with tempfile.TemporaryDirectory(prefix="sweepd-bench-") as tmp, \
                SimServer(time_scale=0.0, noise=False) as sim:
            folder = Path(tmp)
            plan = _plan(folder, sim.tcp_resource, points)
            b = statistics.median(bare(plan, sim.tcp_resource, args.units)) * 1e3
            s = statistics.median(service(folder, args.units)) * 1e3
            p = statistics.median(process(plan, sim.tcp_resource, args.processes)) * 1e3
        print(f"{points:>7} {b:>9.2f} {s:>11.2f} {p:>11.1f} {s - b:>12.2f} {p / s:>15.1f}x")
    print("overhead = service - bare (HTTP, JSON, lock beyond the measurement); goal < 20 ms")
    return 0


if __name__ == "__main__":
    sys.exit(main())
