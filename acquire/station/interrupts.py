"""Interrupts that cannot tear a record in half.

``deferred_interrupt()`` holds Ctrl-C (SIGINT) and SIGTERM while files are written and
the journal row is marked stored; an interrupt that arrives meanwhile is raised as
``KeyboardInterrupt`` right after the block. ``terminate_as_interrupt()`` makes SIGTERM
and SIGHUP (terminal closed) end the station the way Ctrl-C does, so the shift is closed
in the journal. Both only act in the main thread (signals are delivered there).
"""

from __future__ import annotations

import signal
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from types import FrameType
from typing import Any

_HELD = (signal.SIGINT, signal.SIGTERM)
QUIT = ("q", "quit", "exit")  # answers that end the shift at any prompt


class Quit(Exception):
    """The operator ended the shift at a prompt."""


def _main_thread() -> bool:
    return threading.current_thread() is threading.main_thread()


@contextmanager
def deferred_interrupt() -> Iterator[None]:
    """Run the block with SIGINT/SIGTERM held; raise ``KeyboardInterrupt`` after it."""
    if not _main_thread():
        yield
        return
    caught: list[int] = []

    def hold(signum: int, frame: FrameType | None) -> None:
        caught.append(signum)

    previous: dict[int, Any] = {sig: signal.signal(sig, hold) for sig in _HELD}
    try:
        yield
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)
    if caught:
        raise KeyboardInterrupt


def _raise_interrupt(signum: int, frame: FrameType | None) -> None:
    raise KeyboardInterrupt


@contextmanager
def terminate_as_interrupt() -> Iterator[None]:
    """Within the block SIGTERM and SIGHUP raise ``KeyboardInterrupt`` (like Ctrl-C)."""
    if not _main_thread():
        yield
        return
    signals = [signal.SIGTERM] + ([signal.SIGHUP] if hasattr(signal, "SIGHUP") else [])
    previous = {sig: signal.signal(sig, _raise_interrupt) for sig in signals}
    try:
        yield
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)
