"""The error metrics raise when a sweep cannot give the quantity asked for."""

from __future__ import annotations

from drivers.errors import SweepdError


class MetricError(SweepdError, ValueError):
    """A metric cannot be computed from this sweep (too few points, out of range, ...)."""
