"""Engineering-unit parsing for plans (SI prefixes per the SI Brochure, 9th ed.)."""

from __future__ import annotations

import pytest

from acquire.units import format_duration, format_frequency, parse_quantity


@pytest.mark.parametrize(
    ("text", "kind", "expected"),
    [
        ("2.45 GHz", "frequency", 2.45e9),
        ("2450MHz", "frequency", 2.45e9),
        ("915 MHz", "frequency", 915e6),
        ("1 kHz", "frequency", 1e3),
        ("1 KHz", "frequency", 1e3),  # Touchstone spelling
        ("2.45 ghz", "frequency", 2.45e9),
        (".5e3 Hz", "frequency", 500.0),
        (1e9, "frequency", 1e9),
        ("-10 dBm", "power", -10.0),
        ("+5 dBm", "power", 5.0),
        ("90 s", "time", 90.0),
        ("8 h", "time", 28800.0),
        ("5 min", "time", 300.0),
        ("29 ps", "time", 29e-12),
        ("50 ohm", "impedance", 50.0),
        ("50 Ω", "impedance", 50.0),
        ("49.4 fF", "capacitance", 49.4e-15),
        ("2.1 pH", "inductance", 2.1e-12),
        (7, "time", 7.0),
    ],
)
def test_parse_quantity(text: object, kind: str, expected: float) -> None:
    assert parse_quantity(text, kind) == pytest.approx(expected, rel=1e-15)


@pytest.mark.parametrize(
    ("text", "kind", "message"),
    [
        ("2.45 GHzz", "frequency", "unknown frequency unit 'GHzz'"),
        ("fast", "time", "expected a time"),
        (True, "time", "expected a time"),
        ("nan", "frequency", "expected a frequency"),
        ("1e999 Hz", "frequency", "must be finite"),
        ("10 dB", "power", "unknown power unit 'dB'"),
        (None, "power", "expected a power"),
    ],
)
def test_parse_quantity_rejects(text: object, kind: str, message: str) -> None:
    with pytest.raises(ValueError, match=message):
        parse_quantity(text, kind)


def test_formatting() -> None:
    assert format_frequency(2.45e9) == "2.45 GHz"
    assert format_frequency(915e6) == "915 MHz"
    assert format_frequency(12.5e3) == "12.5 kHz"
    assert format_duration(42) == "42 s"
    assert format_duration(9 * 3600 + 720) == "9.2 h"
