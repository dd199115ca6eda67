"""The ``sweepd`` command line: a thin dispatcher.

Kept light on purpose (``sweepd --help`` must not import numpy, pyvisa or matplotlib):
each subcommand lives in ``acquire.commands.<module>`` with ``add_arguments(parser)``
and ``run(args) -> int``, and imports its heavy dependencies inside ``run``.
"""

from __future__ import annotations

import argparse
import importlib
import sys

# name -> (module in acquire.commands, one-line help)
COMMANDS: dict[str, tuple[str, str]] = {
    "run": ("run", "connect, configure, sweep once and save a Touchstone file"),
    "sim": ("sim", "serve a simulated analyzer on a local socket and a pseudo-terminal"),
    "demo": ("demo", "run the main job end to end against the built-in simulator"),
    "calibrate": ("calibrate", "guided calibration: prompt each standard, check, save a cal set"),
    "fixture": ("fixture", "drive the simulator's fixture, device and faults (tests, demo)"),
    "check": ("check", "judge a Touchstone file against masks offline (0 pass, 1 fail, 2 error)"),
    "plot": ("plot", "match, impedance and Smith chart with masks and markers; overlays"),
    "export": ("export", "trace data of a Touchstone file as CSV: frequency plus quantities"),
    "dtf": ("dtf", "distance to fault: reflections along a cable from an S11 file, with limits"),
    "station": ("station", "production-line loop: serial in, sweep, verdict, file, yield"),
    "measure": ("measure", "measure one unit for MES calls: checks, files, journal (0/1/2)"),
    "summary": ("summary", "yield and per-metric statistics (Ppk, Cpk) from a journal; CSV"),
    "serve": ("serve", "run queued soak jobs in the foreground (for systemd); Ctrl-C stops"),
    "submit": ("submit", "queue a soak job from a plan with schedule: and soak: sections"),
    "status": ("status", "show every soak job: state, sweeps, faults, next sweep, drift"),
    "cancel": ("cancel", "stop a soak job cleanly after the sweep in flight"),
    "report": ("report", "plots and summary of a soak job: drift, Allan deviation, alarms"),
    "probe": ("probe", "list the instruments pyvisa-py sees, or identify one and its dialect"),
    "dialect": ("dialect_check", "check a dialect file offline, or command by command on an "
                "instrument"),
}
# Commands that talk to an instrument get --io-log (drivers.iolog); -vv shows the same.
# (``dialect check`` adds it to its own sub-command.)
IO_COMMANDS = {"run", "calibrate", "station", "measure", "serve", "demo", "probe"}
IO_LOG_HELP = ("append every message sent to and received from the instrument to FILE, with "
               "monotonic times and byte counts (binary payloads summarised)")

EXIT_OK, EXIT_FAIL, EXIT_ERROR = 0, 1, 2


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="sweepd",
        description="Unattended, vendor-neutral acquisition of network analyzer sweeps.",
        epilog="Exit codes: 0 ok or pass, 1 failed verdict, 2 error (also any unexpected "
               "one), 3 indeterminate (guarded decision), 130 interrupted.",
    )
    parser.add_argument("--version", action=_VersionAction, help="print the version and exit")
    parser.add_argument(
        "-v", "--verbose", action="count", default=0, help="more log output on stderr"
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, (module, help_text) in COMMANDS.items():
        command = sub.add_parser(name, help=help_text, description=help_text)
        # -v/-vv after the command as well as before it (they add up)
        command.add_argument("-v", "--verbose", action="count", default=0,
                             dest="command_verbose", help="more log output on stderr "
                             "(-vv: debug, with the instrument traffic)")
        if name in IO_COMMANDS:
            command.add_argument("--io-log", metavar="FILE", help=IO_LOG_HELP)
        _module(module).add_arguments(command)
        command.set_defaults(_module=module)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return EXIT_ERROR
    args.verbose += getattr(args, "command_verbose", 0)
    _configure_logging(args.verbose)
    from drivers.errors import SweepdError

    try:
        if getattr(args, "resource", None) is not None and _check_resource(args):
            return EXIT_ERROR
        _start_io_log(args)
        return int(_module(args._module).run(args))
    except SweepdError as exc:
        _error(str(exc))
    except KeyboardInterrupt:
        print("sweepd: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return EXIT_ERROR
    except OSError as exc:  # disk full, permissions: one line, no traceback
        where = f" ({exc.filename})" if exc.filename else ""
        _error(f"{exc.strerror or exc}{where}")
    except Exception as exc:  # anything unforeseen: exit 2, never 1 (1 means "failed")
        from acquire.errors import internal_error_text

        _error(internal_error_text(exc))
    finally:
        if "drivers.iolog" in sys.modules:
            sys.modules["drivers.iolog"].stop()
    return EXIT_ERROR


def _start_io_log(args: argparse.Namespace) -> None:
    """``--io-log FILE`` and ``-vv`` (traffic on stderr) share the I/O log hook."""
    path = getattr(args, "io_log", None)
    if path is None and args.verbose < 2:
        return
    from drivers import iolog

    iolog.start(path)


def _error(message: str) -> None:
    """``sweepd: error: <message>`` on stderr, always one line."""
    from drivers.yamlnode import one_line

    print(f"sweepd: error: {one_line(message)}", file=sys.stderr)


def _check_resource(args: argparse.Namespace) -> bool:
    """``--resource`` follows the rules plans follow; True when refused (acquire.commands.
    resource_option, loaded like a command so that this module stays light)."""
    return _module("resource_option").run(args) != EXIT_OK


def _module(name: str):
    return importlib.import_module(f"acquire.commands.{name}")


def _configure_logging(verbosity: int) -> None:
    import logging

    level = logging.WARNING - 10 * min(verbosity, 2)
    logging.basicConfig(
        level=level,
        stream=sys.stderr,
        format="%(asctime)s %(levelname)s %(name)s: %(message)s",
    )
    _warnings_to_debug_log()


def _warnings_to_debug_log() -> None:
    """Python warnings (numpy's RuntimeWarnings among them) go to the log at debug level,
    never straight to stderr: a user sees one line per problem, or nothing."""
    import logging
    import warnings

    log = logging.getLogger("sweepd.warnings")

    def show(message, category, filename, lineno, file=None, line=None) -> None:
        log.debug("%s: %s (%s:%s)", category.__name__, message, filename, lineno)

    warnings.showwarning = show


class _VersionAction(argparse.Action):
    """Like ``action='version'`` but looks the version up only when asked."""

    def __init__(self, option_strings: list[str], dest: str, **kwargs: object) -> None:
        super().__init__(option_strings, dest, nargs=0, **kwargs)

    def __call__(self, parser, namespace, values, option_string=None) -> None:
        print(f"sweepd {_version()}")
        parser.exit()


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("sweepd")
    except Exception:  # not installed (running from a checkout)
        return "0+unknown"


if __name__ == "__main__":
    sys.exit(main())
