"""The instrument I/O log: every message sent and received, for debugging a dialect or a
fault at a site (``--io-log FILE``; ``-vv`` shows the same lines on stderr).

One line per event, in order, safe from several threads (the soak daemon drives several
instruments)::

    #   sweepd I/O log, started 2026-12-03T08:30:00Z; times are monotonic seconds from here
         0.000412 TCPIP::127.0.0.1::5025::SOCKET open
         0.001020 TCPIP::127.0.0.1::5025::SOCKET > 6 B '*IDN?\\n'
         0.001398 TCPIP::127.0.0.1::5025::SOCKET < 38 B 'sweepd-sim,generic-2port,SIM0001,1.0\\n'
         0.004112 TCPIP::127.0.0.1::5025::SOCKET < 160019 B block #6160016 + 160016 B binary + '\\n'

``>`` is sent, ``<`` received, ``drop`` input thrown away while getting back in step.
Text is shown as a Python bytes literal cut at 200 bytes; binary payloads are summarised
(length and the first bytes in hex), never written out.
"""

from __future__ import annotations

import logging
import threading
import time
from datetime import datetime, timezone
from pathlib import Path
from typing import TextIO

SHOWN = 200  # bytes of a text message shown
LOG = logging.getLogger("sweepd.io")


class IoLog:
    """A sink for I/O events: a file (optional) and the ``sweepd.io`` logger at debug."""

    def __init__(self, stream: TextIO | None = None) -> None:
        self._stream = stream
        self._lock = threading.Lock()
        self._origin = time.monotonic()
        started = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
        self._write(f"# sweepd I/O log, started {started}; times are monotonic seconds "
                    "from here")

    def event(self, resource: str, what: str, data: bytes | None = None,
              block: tuple[bytes, int, bytes] | None = None) -> None:
        """Record one event; ``block`` is (header, payload length, terminator)."""
        if self._stream is None and not LOG.isEnabledFor(logging.DEBUG):
            return
        detail = ""
        if block is not None:
            header, length, term = block
            detail = (f" {len(header) + length + len(term)} B block {header.decode('ascii')}"
                      f" + {length} B binary + {repr(term)[1:]}")
        elif data is not None:
            detail = f" {len(data)} B {show(data)}"
        line = f"{time.monotonic() - self._origin:12.6f} {resource} {what}{detail}"
        self._write(line)
        LOG.debug("%s", line)

    def _write(self, line: str) -> None:
        if self._stream is None:
            return
        with self._lock:
            self._stream.write(line + "\n")
            self._stream.flush()

    def close(self) -> None:
        if self._stream is not None:
            with self._lock:
                self._stream.close()
                self._stream = None


def show(data: bytes) -> str:
    """A message as a bytes literal cut at ``SHOWN`` bytes, or a summary if it is binary."""
    if data.startswith(b"#") and len(data) > 2 and 0x31 <= data[1] <= 0x39:
        return f"block, starts {data[:16].hex(' ')}"
    binary = sum((b < 0x20 and b not in (0x09, 0x0A, 0x0D)) or b > 0x7E for b in data[:SHOWN])
    if binary > len(data[:SHOWN]) // 8:
        return f"binary, starts {data[:16].hex(' ')}"
    text = repr(bytes(data[:SHOWN]))[1:]
    return text + (f" ... (+{len(data) - SHOWN} B)" if len(data) > SHOWN else "")


_SINK: IoLog | None = None


def sink() -> IoLog | None:
    """The process's I/O log, if one is open (the transport asks on every message)."""
    return _SINK


def start(path: str | Path | None = None) -> IoLog:
    """Open the process's I/O log (to ``path``, or only to the logger); replaces any other."""
    global _SINK
    stop()
    stream = None
    if path is not None:
        stream = open(path, "a", encoding="utf-8")  # noqa: SIM115 - kept open for the run
    _SINK = IoLog(stream)
    return _SINK


def stop() -> None:
    global _SINK
    if _SINK is not None:
        _SINK.close()
        _SINK = None


__all__ = ["IoLog", "show", "sink", "start", "stop"]
