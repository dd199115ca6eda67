"""Journal time stamps: UTC, ISO 8601 with milliseconds and a ``Z``."""

from __future__ import annotations

from datetime import datetime, timezone


def utc_text(moment: datetime | None = None) -> str:
    moment = moment or datetime.now(timezone.utc)
    return moment.astimezone(timezone.utc).isoformat(timespec="milliseconds").replace(
        "+00:00", "Z"
    )
