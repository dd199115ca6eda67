"""Command-line options of the simulator, shared by ``sweepd sim`` and ``python -m simulators``.

Only argparse here, so that building the ``sweepd`` parser stays fast.
"""

from __future__ import annotations

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the simulator's options to ``parser``."""
    parser.add_argument("--port", type=int, default=0, metavar="N",
                        help="TCP port on 127.0.0.1 (0 picks a free one; default 0)")
    parser.add_argument("--no-tcp", action="store_true", help="do not listen on TCP")
    parser.add_argument("--hislip-port", type=int, default=0, metavar="N",
                        help="HiSLIP port on 127.0.0.1 (0 picks a free one; default 0)")
    parser.add_argument("--no-hislip", action="store_true", help="do not serve HiSLIP")
    parser.add_argument("--vxi11-port", type=int, default=None, metavar="N",
                        help="also serve VXI-11 on this port (0 picks a free one)")
    parser.add_argument("--serial", action="store_true",
                        help="also serve on a pseudo-terminal (ASRL/dev/pts/N::INSTR)")
    parser.add_argument("--personality", default="generic",
                        choices=("generic", "tabletop", "slotted"),
                        help="command set (default generic)")
    parser.add_argument("--control-port", type=int, default=0, metavar="N",
                        help="control channel port on 127.0.0.1 (0 picks a free one)")
    parser.add_argument("--time-scale", type=float, default=1.0, metavar="X",
                        help="multiply sweep and settle times by X (0: instant; default 1)")
    parser.add_argument("--clock-rate", type=float, default=1.0, metavar="R",
                        help="simulated seconds per real second for drift (default 1)")
    noise = parser.add_mutually_exclusive_group()
    noise.add_argument("--noise", dest="noise", action="store_true", default=True,
                       help="add receiver noise (default)")
    noise.add_argument("--no-noise", dest="noise", action="store_false",
                       help="noise-free traces")
    parser.add_argument("--frozen", action="store_true",
                        help="compute each configuration once and serve cached replies")
    parser.add_argument("--seed", type=int, default=1, help="random seed (default 1)")
    parser.add_argument("--device", default="patch-2g45", metavar="KIND",
                        help="device kind or preset: resonator, impedance, cable, filter, "
                             "attenuator, patch-2g45, whip-915, cable-1m, bandpass-2g45, "
                             "check-25ohm, attenuator-10db")
    parser.add_argument("--param", action="append", default=[], metavar="KEY=VALUE",
                        help="device parameter override, repeatable (e.g. f0_hz=2.44e9)")
    parser.add_argument("--lot", default="patch-2g45", metavar="NAME",
                        help="lot of units for serial selection (patch-2g45, whip-915)")
    parser.add_argument("--kit", default="generic-sma-50", metavar="NAME|PATH",
                        help="cal kit file the fixture's standards follow")
    parser.add_argument("--connect", default="device",
                        choices=("open", "short", "load", "thru", "device"),
                        help="what the fixture presents at start (default device)")
    add_truth_command(parser)


def add_truth_command(parser: argparse.ArgumentParser) -> None:
    """``truth``: write a device's true S-parameters as Touchstone (``simulators.truth``)."""
    sub = parser.add_subparsers(dest="sim_command", metavar="truth",
                                title="instead of serving")
    truth = sub.add_parser("truth", help="write a device's true S-parameters on a grid as "
                           "Touchstone (the reference a corrected measurement should match)",
                           description="Write a device's true S-parameters on a linear grid "
                           "as a Touchstone 1.1 file (.s1p or .s2p).")
    truth.add_argument("--device", default="patch-2g45", metavar="KIND",
                       help="device kind or preset, as for the simulator (e.g. cable-1m)")
    truth.add_argument("--param", action="append", default=[], metavar="KEY=VALUE",
                       help="device parameter override, repeatable")
    truth.add_argument("--start", required=True, metavar="F1",
                       help="first frequency: Hz or with a unit (10e6, '10 MHz')")
    truth.add_argument("--stop", required=True, metavar="F2",
                       help="last frequency: Hz or with a unit (6e9, 6GHz)")
    truth.add_argument("--points", type=int, required=True, metavar="N",
                       help="number of points, linear grid")
    truth.add_argument("-o", "--output", required=True, metavar="FILE",
                       help="file to write: .s1p for a one-port device, .s2p for a two-port")
    truth.add_argument("--force", action="store_true", help="replace an existing file")
