"""Errors of the station, measure and summary commands (all ``SweepdError``)."""

from __future__ import annotations

from drivers.errors import SweepdError


class StationError(SweepdError):
    """A station, measure or summary request cannot be carried out."""


class SerialRefused(StationError):
    """A scanned serial is not acceptable; the message says why in one line."""


class GoldenError(StationError):
    """The golden unit cannot be compared with its reference (grid, ports, data)."""


class LineStopped(StationError):
    """The line is stopped (golden check failed) or a golden check is due."""
