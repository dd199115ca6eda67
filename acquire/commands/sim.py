"""``sweepd sim``: serve a simulated analyzer on a local socket and/or a pseudo-terminal.

The options live in ``simulators.options`` (argparse only, light to import) so that
``python -m simulators`` accepts exactly the same; the simulator itself is imported in
``run`` only.
"""

from __future__ import annotations

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from simulators.options import add_arguments as add_sim_arguments

    add_sim_arguments(parser)


def run(args: argparse.Namespace) -> int:
    from acquire.errors import ConfigError
    from simulators.cli import serve
    from simulators.errors import SimError

    try:
        return serve(args)
    except SimError as exc:
        raise ConfigError(str(exc)) from None
