"""The shared helpers: UTC text forms and the NaN-to-null JSON clean-up.

Sources: RFC 3339 (ISO 8601 profile) section 5.6 grammar and the examples of section 5.8;
RFC 8259 section 6 (JSON numbers: "Numeric values that cannot be represented in the
grammar below (such as Infinity and NaN) are not permitted").
"""

from __future__ import annotations

import json
import math
from datetime import datetime, timedelta, timezone

import numpy as np
import pytest

from acquire.jsonclean import finite_or_none, json_safe, json_text
from acquire.utc import compact_utc, epoch_text, parse_iso, parse_utc, utc_text

MOMENT = datetime(2026, 12, 2, 6, 10, 0, 123456, tzinfo=timezone.utc)


def test_utc_text_forms():
    assert utc_text(MOMENT) == "2026-12-02T06:10:00.123Z"
    assert utc_text(MOMENT, digits=6) == "2026-12-02T06:10:00.123456Z"
    assert compact_utc(MOMENT) == "20261202T061000Z"
    east = MOMENT.astimezone(timezone(timedelta(hours=5, minutes=30)))
    assert utc_text(east) == "2026-12-02T06:10:00.123Z"  # same instant, written in UTC
    with pytest.raises(ValueError):
        utc_text(MOMENT, digits=2)


def test_rfc3339_examples_parse_to_their_instants():
    # RFC 3339 section 5.8: "1985-04-12T23:20:50.52Z" and "1996-12-19T16:39:57-08:00"
    assert parse_utc("1985-04-12T23:20:50.52Z") == \
        datetime(1985, 4, 12, 23, 20, 50, 520000, tzinfo=timezone.utc)
    assert parse_utc("1996-12-19T16:39:57-08:00") == \
        datetime(1996, 12, 20, 0, 39, 57, tzinfo=timezone.utc)
    # RFC 3339 section 5.6: "T" and "Z" may be lower case
    assert parse_utc("1985-04-12t23:20:50.52z") == parse_utc("1985-04-12T23:20:50.52Z")


def test_round_trips_and_naive_times():
    for digits in (3, 6):
        text = utc_text(MOMENT, digits=digits)
        assert utc_text(parse_utc(text), digits=digits) == text
    assert parse_iso("2026-12-02 06:00").tzinfo is None
    assert parse_utc("2026-12-02T06:00") == datetime(2026, 12, 2, 6, tzinfo=timezone.utc)
    with pytest.raises(ValueError):
        parse_utc("yesterday")


def test_epoch_text():
    assert epoch_text(0.0) == "1970-01-01T00:00:00.000Z"
    assert epoch_text(None) is None and epoch_text(math.nan) is None
    assert epoch_text(math.inf) is None


def test_json_safe_turns_non_finite_into_null_and_numpy_into_plain():
    value = {"a": math.nan, "b": [np.float64(1.5), np.inf, (np.int32(3), -np.inf)],
             "c": np.array([1.0, np.nan]), "d": np.bool_(True), 4: "x", "e": None}
    safe = json_safe(value)
    assert safe == {"a": None, "b": [1.5, None, [3, None]], "c": [1.0, None], "d": True,
                    "4": "x", "e": None}
    assert type(safe["b"][0]) is float and type(safe["b"][2][0]) is int
    assert type(safe["d"]) is bool
    # RFC 8259 section 6: NaN and Infinity are not JSON; the text parses back strictly
    text = json_text(value, sort_keys=True)
    assert json.loads(text, parse_constant=lambda c: pytest.fail(f"{c} in JSON")) == safe


def test_finite_or_none():
    assert finite_or_none(None) is None and finite_or_none(math.nan) is None
    assert finite_or_none(np.float32(2.5)) == 2.5 and finite_or_none(-math.inf) is None
