"""Opening pyvisa-py sessions quietly: one manager per process, third-party chatter kept.

pyvisa and pyvisa-py report some failures by logging (pyvisa-py logs a full traceback
when a HiSLIP or VXI-11 connection cannot be made, pyvisa warns about resource classes it
does not know) before raising a terse VISA status. While a session opens, records of the
``pyvisa`` logger from the opening thread are held back instead of reaching stderr; when
the open fails, the root cause they carry becomes part of our one-line message, and the
records themselves go to our own logger at debug level (``-vv`` shows them).
"""

from __future__ import annotations

import gc
import logging
import threading
import warnings
from typing import Any

_RM: Any = None
_RM_LOCK = threading.Lock()
_HELD = threading.local()
LOG = logging.getLogger("sweepd.visa")


class _HoldBack(logging.Filter):
    """Drops records emitted by a thread that is opening a session, keeping them."""

    def filter(self, record: logging.LogRecord) -> bool:
        held = getattr(_HELD, "records", None)
        if held is None:
            return True
        held.append(record)
        return False


_FILTER = _HoldBack()


def resource_manager() -> Any:
    """The process-wide ``pyvisa.ResourceManager("@py")``, created on first use.

    pyvisa hands every caller the same manager, so other code in the process may close
    it; a closed one is replaced (its resources were closed with it).
    """
    global _RM
    with _RM_LOCK:
        if _RM is None or getattr(_RM.visalib, "resource_manager", None) is not _RM:
            import pyvisa

            logger = logging.getLogger("pyvisa")
            if _FILTER not in logger.filters:
                logger.addFilter(_FILTER)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")  # optional transports reported missing
                _RM = pyvisa.ResourceManager("@py")
        return _RM


def open_session(resource: str, **kwargs: Any) -> Any:
    """``open_resource`` with third-party log records held back.

    Raises ``OpenFailed`` whose text is one line: the deepest cause found in the held
    records or the exception chain.
    """
    rm = resource_manager()
    _HELD.records = []
    # Ignored while opening: pyvisa-py's warnings about optional transports, and the
    # ResourceWarning of the socket a failed HiSLIP/VXI-11 client of pyvisa-py 0.8 leaves
    # open (collected here rather than at some later moment).
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            return rm.open_resource(resource, **kwargs)
        except Exception as exc:  # pyvisa, pyvisa-py and pyserial raise many kinds here
            reason = _root_cause(exc, _HELD.records)
        finally:
            _release(resource)
        gc.collect()
    raise OpenFailed(reason)


def _release(resource: str) -> None:
    """Stop holding records back; pass them to our logger at debug level."""
    records, _HELD.records = _HELD.records, None
    for record in records:
        LOG.debug("pyvisa said while opening %s: %s", resource, record.getMessage(),
                  exc_info=record.exc_info)


class OpenFailed(Exception):
    """A session could not be opened; ``args[0]`` is one line saying why."""


def _root_cause(exc: BaseException, records: list[logging.LogRecord]) -> str:
    """The most telling one-line reason: the cause a held record carries (pyvisa-py logs
    the socket error behind a failed HiSLIP or VXI-11 open), else the exception itself."""
    for record in records:
        if record.exc_info and record.exc_info[1] is not None:
            cause = _deepest(record.exc_info[1])
            if isinstance(cause, OSError) and cause.strerror:
                return cause.strerror
            return describe(cause)
    return describe(exc)


def _deepest(exc: BaseException) -> BaseException:
    seen = {id(exc)}
    while True:
        nxt = exc.__cause__ or exc.__context__
        if nxt is None or id(nxt) in seen:
            return exc
        seen.add(id(nxt))
        exc = nxt


def describe(exc: BaseException) -> str:
    """One line for an exception from pyvisa, pyvisa-py, pyserial or the OS."""
    description = getattr(exc, "description", None)
    abbreviation = getattr(exc, "abbreviation", None)
    if description and abbreviation:
        return f"{abbreviation}: {description}"
    text = " ".join(str(exc).split())
    return text or type(exc).__name__


__all__ = ["OpenFailed", "describe", "open_session", "resource_manager"]
