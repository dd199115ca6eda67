"""Errors raised by the acquire layer; all hang from ``drivers.errors.SweepdError``."""

from __future__ import annotations

from drivers.errors import SweepdError

__all__ = [
    "CalError",
    "ConfigError",
    "JournalError",
    "MaskError",
    "PlanError",
    "StorageError",
    "SweepdError",
    "TouchstoneError",
]


class ConfigError(SweepdError):
    """A YAML configuration file (plan, mask, kit, ...) is missing or invalid."""


class PlanError(ConfigError):
    """A test plan is invalid; the message names file, key path and what is allowed."""


class MaskError(ConfigError):
    """A limit mask file is invalid or cannot be applied to a sweep."""


class CalError(SweepdError):
    """A calibration cannot be made, loaded or applied (stale, mismatched, implausible)."""


class CheckError(SweepdError):
    """A check cannot judge this sweep."""


class TouchstoneError(SweepdError):
    """A Touchstone file cannot be read or written; names file and line."""


class StorageError(SweepdError):
    """Results cannot be stored safely (disk full, permissions, name clash)."""


class JournalError(SweepdError):
    """The journal database is unreadable, too new, or inconsistent."""


def internal_error_text(exc: BaseException) -> str:
    """One line for an unexpected exception; its traceback goes to the log at debug level."""
    import logging

    logging.getLogger("sweepd").debug("unexpected error", exc_info=exc)
    detail = " ".join(str(exc).split())
    detail = detail if len(detail) <= 160 else detail[:157] + "..."
    return (f"internal error ({type(exc).__name__}{': ' + detail if detail else ''}); "
            "run with -vv for the traceback")
