"""UTC times as sweepd writes and reads them: one function for each form.

- ``utc_text(moment)``: ISO 8601 with ``Z`` and milliseconds, ``2026-12-02T06:10:00.123Z``
  (journal rows, status and JSON files); ``digits=6`` gives the microsecond form that cal
  set and partial-cal files use (``2026-12-02T06:10:00.123456Z``).
- ``compact_utc(moment)``: the file-name form ``20261202T061000Z``; ``minute_text(moment)``
  the message form ``2026-12-02T06:10Z``.
- ``epoch_text(seconds)``: ``utc_text`` of a POSIX time, ``None`` for none or non-finite.
- ``utc_now()``: now, from the machine's clock or one a test injected (``set_clock``).
- ``parse_utc(text)``: any ISO 8601 time with ``Z`` or an offset as an aware UTC datetime
  (a time without either is taken as UTC); ``parse_iso`` leaves a naive time naive.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from datetime import datetime, timezone


def system_now() -> datetime:
    """The machine's clock, in UTC."""
    return datetime.now(timezone.utc)


_source: Callable[[], datetime] = system_now


def utc_now() -> datetime:
    """Now, in UTC: the machine's clock unless a test has set another (``set_clock``)."""
    return _source()


def set_clock(source: Callable[[], datetime] | None) -> Callable[[], datetime]:
    """Let ``utc_now`` (and so cal-set ages, journal times, schedules) read ``source``;
    ``None`` restores the machine's clock. Returns the previous source. For tests, which
    move time forward instead of sleeping past a validity window."""
    global _source
    previous, _source = _source, source or system_now
    return previous


def utc_text(moment: datetime | None = None, *, digits: int = 3) -> str:
    """ISO 8601 UTC ending in ``Z``, with 3 (default) or 6 decimals of seconds."""
    if digits not in (3, 6):
        raise ValueError(f"digits must be 3 or 6, got {digits}")
    moment = (moment or utc_now()).astimezone(timezone.utc)
    spec = "milliseconds" if digits == 3 else "microseconds"
    return moment.replace(tzinfo=None).isoformat(timespec=spec) + "Z"


def compact_utc(moment: datetime | None = None) -> str:
    """File-name form of a UTC time: ``20261202T061000Z``."""
    return (moment or utc_now()).astimezone(timezone.utc).strftime("%Y%m%dT%H%M%SZ")


def minute_text(moment: datetime | None = None) -> str:
    """A UTC time to the minute, for messages: ``2026-12-02T06:10Z``."""
    return (moment or utc_now()).astimezone(timezone.utc).strftime("%Y-%m-%dT%H:%MZ")


def epoch_text(seconds: float | None) -> str | None:
    """``utc_text`` of a POSIX time; ``None`` for ``None``, NaN or infinity."""
    if seconds is None or not math.isfinite(seconds):
        return None
    return utc_text(datetime.fromtimestamp(seconds, timezone.utc))


def parse_iso(text: str) -> datetime:
    """An ISO 8601 date or time; a trailing ``Z`` means UTC; a space may stand for ``T``.
    Naive when the text gives no zone. Raises ``ValueError`` for anything else."""
    value = text.strip()
    if value.endswith(("Z", "z")):
        value = value[:-1] + "+00:00"
    return datetime.fromisoformat(value.replace(" ", "T", 1))


def parse_utc(text: str) -> datetime:
    """A timestamp sweepd wrote (``Z`` or an offset) as an aware UTC datetime; a time
    without a zone is taken as UTC."""
    moment = parse_iso(text)
    if moment.tzinfo is None:
        return moment.replace(tzinfo=timezone.utc)
    return moment.astimezone(timezone.utc)
