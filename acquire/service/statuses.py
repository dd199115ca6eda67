"""The HTTP status the service answers for each kind of failure (one table, used by the
app and by the measurement route)."""

from __future__ import annotations

from acquire.instruments import InstrumentBusy
from acquire.service.models import Problem
from drivers.errors import InstrumentError

# The refusals every route may answer, each a one-line ``{"error": ...}`` (OpenAPI).
REFUSED = {status: {"model": Problem} for status in (400, 401, 404, 409, 413, 422)}


def status_for(exc: BaseException) -> int:
    """The HTTP status for a ``SweepdError`` (table in ``acquire.service.app``)."""
    from acquire.errors import CalError, ConfigError
    from acquire.soak.spool import SpoolError
    from acquire.station.errors import LineStopped, StationError

    if isinstance(exc, (InstrumentBusy, LineStopped, CalError)):
        return 409
    if isinstance(exc, (ConfigError, StationError)):
        return 404 if "no such plan" in str(exc) else 422
    if isinstance(exc, SpoolError):
        return 404 if "no job" in str(exc) else 409
    if isinstance(exc, InstrumentError):
        return 502
    return 500
