"""``sweepd serve --listen``: the HTTP service in a thread beside the soak daemon.

The daemon keeps the main thread (signals, the job loop); the web server runs in a
thread of its own and stops when the daemon stops. Both share one ``Instruments``, so a
soak job and a measurement never talk to one instrument at the same time.
"""

from __future__ import annotations

import logging
import threading
from pathlib import Path
from typing import Any

from acquire.instruments import Instruments
from acquire.service.access import AccessError, Listen, check_access

log = logging.getLogger(__name__)


class WebThread:
    """A uvicorn server for ``app`` on ``listen``, started and stopped from the daemon."""

    def __init__(self, app: Any, listen: Listen) -> None:
        import uvicorn

        config = uvicorn.Config(app, host=listen.host, port=listen.port, log_level="warning",
                                access_log=False, lifespan="off", timeout_graceful_shutdown=5)
        self.server = uvicorn.Server(config)
        self.server.install_signal_handlers = lambda: None  # the daemon owns the signals
        self.thread = threading.Thread(target=self.server.run, name="sweepd-http",
                                       daemon=True)
        self.listen = listen

    def start(self, timeout_s: float = 10.0) -> int:
        """Start serving; returns the port (the one picked when 0 was asked)."""
        import time

        self.thread.start()
        deadline = time.monotonic() + timeout_s
        while not self.server.started:
            if not self.thread.is_alive() or time.monotonic() > deadline:
                raise AccessError(f"--listen {self.listen.host}:{self.listen.port}: the web "
                                  "server did not start (address in use?)")
            time.sleep(0.02)
        sockets = [s for server in self.server.servers for s in server.sockets]
        return int(sockets[0].getsockname()[1]) if sockets else self.listen.port

    def stop(self) -> None:
        self.server.should_exit = True
        self.thread.join(15)


def serve_with_http(spool: Any, *, listen: Listen, token_file: Path | None, plans_dir: Path,
                    until_idle: bool, port_file: Path | None = None) -> int:
    """Run the soak daemon with the HTTP service beside it."""
    try:
        from acquire.service.app import Service, create_app
    except ImportError as exc:  # the web framework is an optional extra
        raise AccessError(f"--listen needs the service extra ({exc.name} is missing): "
                          "pip install 'sweepd[service]'") from None
    from acquire.service.plans import PlanBook
    from acquire.soak.daemon import Daemon
    from acquire.storage import replace_atomic

    token = check_access(listen, token_file)
    instruments = Instruments()
    service = Service(PlanBook(plans_dir), spool.root, instruments, token=token)
    web = WebThread(create_app(service), listen)
    daemon = Daemon(spool, until_idle=until_idle, instruments=instruments)
    spool.ensure()
    port = web.start()
    url = f"http://{listen.host}:{port}/"
    log.info("serving the HTTP API and status page at %s (plans from %s)", url, plans_dir)
    if port_file is not None:
        replace_atomic(port_file, f"{port}\n")
    try:
        return daemon.serve()
    finally:
        web.stop()
        instruments.close_all()
