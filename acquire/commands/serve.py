"""``sweepd serve [--spool DIR]``: run soak jobs in the foreground (for systemd).

Logs go to stderr, one event per line with its level. On a terminal a progress line per
running job appears every few seconds; under systemd (no terminal) only the log lines.
SIGTERM or SIGINT stop it after the sweeps in flight; the jobs resume when it starts again.
"""

from __future__ import annotations

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_spool_argument(parser)
    parser.add_argument("--until-idle", action="store_true",
                        help="exit once no queued or running job is left (scripts, tests)")
    parser.add_argument("-q", "--quiet", action="store_true",
                        help="log warnings and errors only (default: one line per event)")
    web = parser.add_argument_group("HTTP service and status page")
    web.add_argument("--listen", metavar="HOST:PORT",
                     help="also serve the HTTP API and the status page (loopback only, "
                          "unless --token-file is given), e.g. 127.0.0.1:8350")
    web.add_argument("--token-file", metavar="FILE",
                     help="callers must send this token (file mode 600, owned by you)")
    web.add_argument("--plans", metavar="DIR", default=".",
                     help="folder of the plans the API may run, by name (default: .)")
    web.add_argument("--port-file", metavar="FILE", help=argparse.SUPPRESS)


def add_spool_argument(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--spool", metavar="DIR",
                        help="spool folder (default $SWEEPD_SPOOL, else "
                             "~/.local/state/sweepd/spool)")


def run(args: argparse.Namespace) -> int:
    import logging

    from acquire.soak.daemon import Daemon
    from acquire.soak.spool import Spool

    level = logging.WARNING if args.quiet else (logging.DEBUG if args.verbose else logging.INFO)
    logging.getLogger("acquire").setLevel(level)
    if args.listen:
        from acquire.commands import cli_path
        from acquire.service.access import parse_listen
        from acquire.service.runner import serve_with_http

        return serve_with_http(
            Spool(args.spool), listen=parse_listen(args.listen),
            token_file=cli_path(args.token_file) if args.token_file else None,
            plans_dir=cli_path(args.plans), until_idle=args.until_idle,
            port_file=cli_path(args.port_file) if args.port_file else None)
    return Daemon(Spool(args.spool), until_idle=args.until_idle).serve()
