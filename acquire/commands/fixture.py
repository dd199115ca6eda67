"""``sweepd fixture ADDRESS OP ...``: drive the simulator's fixture, device and faults.

A thin front to ``simulators.control``: the demo and scripted calibrations use it as the
per-step command (``sweepd fixture 127.0.0.1:40124 connect {standard}``).
"""

from __future__ import annotations

import argparse

OPERATIONS = """operations (ADDRESS OP [ARGS...]; arguments are key=value, some bare):
  ping                               check the control channel answers
  state                              instrument, bench and faults, as JSON
  connect open|short|load|thru|device   what the fixture connects to the port
  device KIND [key=value ...]        the device on the fixture (a kind or a preset)
  unit SERIAL                        put that unit of the lot on the fixture
  lot name=NAME [kind= nominal= spread= seed= golden=]   choose the lot of units
  noise on|off                       trace noise
  time_scale X                       simulated time per real second (0: no waiting)
  clock [advance=S] [rate=R]         the simulated clock
  arm KIND [count=N ...]             arm a fault (drop, stall, garbage, ...)
  schedule [at=3:drop,7:stall]       faults at given sweeps
  clear_faults                       disarm every fault
  drift period_s=... amplitude_c=... temperature drift of the device
  disturb [delay_s= z_ohm= loss_db_at_1ghz=]   move the fixture (a golden check fails)
  restore                            put the fixture back where it was
  trigger                            an external trigger
example: sweepd fixture 127.0.0.1:40124 connect open
Exit codes: 0 done, 2 error."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.formatter_class = argparse.RawDescriptionHelpFormatter
    parser.add_argument(
        "words", nargs=argparse.REMAINDER,
        help="HOST:PORT of the simulator's control channel (printed by sweepd sim), then "
             "an operation and its arguments (listed below)",
    )
    parser.epilog = OPERATIONS


def run(args: argparse.Namespace) -> int:
    from simulators.control import main

    return int(main(args.words, prog="sweepd fixture"))
