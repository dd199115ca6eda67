"""Run the simulator from the command line until SIGINT or SIGTERM.

Prints one line per endpoint as soon as it listens (the VISA resource string: raw socket,
then serial, then HiSLIP), then ``control 127.0.0.1:PORT``, each flushed, so a parent
process can read them.
"""

from __future__ import annotations

import argparse
import signal
import sys
import threading
from typing import Any

from simulators.errors import SimError
from simulators.options import add_arguments


def device_params(pairs: list[str]) -> dict[str, Any]:
    """``["q=12", "topology=series"]`` → ``{"q": 12.0, "topology": "series"}``."""
    params: dict[str, Any] = {}
    for pair in pairs:
        key, sep, text = pair.partition("=")
        if not sep or not key:
            raise SimError(f"--param: expected KEY=VALUE, got {pair!r}")
        try:
            params[key] = float(text)
        except ValueError:
            params[key] = text
    return params


def serve(args: argparse.Namespace, out: Any = None) -> int:
    """Start the simulator described by ``args``; block until a signal; exit code."""
    out = out or sys.stdout
    if getattr(args, "sim_command", None) == "truth":
        from simulators.truth import write_truth

        return write_truth(args, device_params(args.param), out)
    from simulators.server import SimServer

    hislip_port = None if getattr(args, "no_hislip", False) else args.hislip_port
    sim = SimServer(personality=args.personality, tcp_port=None if args.no_tcp else args.port,
                    hislip_port=hislip_port, vxi11_port=getattr(args, "vxi11_port", None),
                    serial=args.serial, control_port=args.control_port,
                    time_scale=args.time_scale, noise=args.noise, seed=args.seed,
                    frozen=args.frozen, kit=args.kit, lot=args.lot, clock_rate=args.clock_rate)
    if args.device != "patch-2g45" or args.param:
        sim.bench.set_device(args.device, **device_params(args.param))
    sim.bench.connect(args.connect)
    if args.no_tcp and not args.serial and hislip_port is None:
        raise SimError("sim: nothing to serve (--no-tcp and --no-hislip without --serial)")
    done = threading.Event()
    previous = {sig: signal.signal(sig, lambda *_: done.set())
                for sig in (signal.SIGINT, signal.SIGTERM)}
    try:
        sim.start()
        for resource in sim.resources():
            print(resource, file=out, flush=True)
        host, port = sim.control_address
        print(f"control {host}:{port}", file=out, flush=True)
        while not done.wait(0.5):
            pass
    finally:
        sim.stop()
        for sig, handler in previous.items():
            signal.signal(sig, handler)
    return 0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m simulators",
                                     description="Serve a simulated network analyzer.")
    add_arguments(parser)
    args = parser.parse_args(argv)
    try:
        return serve(args)
    except SimError as exc:
        print(f"{parser.prog}: error: {exc}", file=sys.stderr)
        return 2
