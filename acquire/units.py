"""Engineering quantities in plans: "2.45 GHz", "-10 dBm", "1 kHz", "90 s", "8 h".

Inside sweepd everything is an SI float (Hz, dBm, s, dB, ohm). A bare number is taken in
the base unit of its kind. Errors are ``ValueError`` with a one-line message naming what
was given and what is allowed; the plan loader adds the file and key path.
"""

from __future__ import annotations

import math
import re

_NUMBER = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_QUANTITY = re.compile(rf"^\s*({_NUMBER})\s*([^\s\d].*?)?\s*$")

# Unit spellings accepted per kind, mapped to the factor into the base unit.
# Millihertz is deliberately absent: in RF work "mhz"/"MHZ" always means megahertz.
_UNITS: dict[str, dict[str, float]] = {
    "frequency": {
        "hz": 1.0, "khz": 1e3, "mhz": 1e6, "ghz": 1e9, "thz": 1e12,
    },
    "power": {"dbm": 1.0},
    "time": {
        "s": 1.0, "sec": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6, "ns": 1e-9,
        "ps": 1e-12, "fs": 1e-15,
        "min": 60.0, "h": 3600.0, "hr": 3600.0, "d": 86400.0,
    },
    "decibel": {"db": 1.0},
    "impedance": {"ohm": 1.0, "ω": 1.0, "kohm": 1e3, "kω": 1e3},
    "capacitance": {"f": 1.0, "pf": 1e-12, "ff": 1e-15, "nf": 1e-9},
    "inductance": {"h": 1.0, "nh": 1e-9, "ph": 1e-12, "uh": 1e-6, "µh": 1e-6},
    "angle": {"deg": 1.0, "°": 1.0},
    "length": {"m": 1.0, "cm": 1e-2, "mm": 1e-3, "km": 1e3, "ft": 0.3048},
}

BASE_SYMBOL = {
    "frequency": "Hz", "power": "dBm", "time": "s", "decibel": "dB",
    "impedance": "ohm", "capacitance": "F", "inductance": "H", "angle": "deg",
    "length": "m",
}


def parse_quantity(value: object, kind: str) -> float:
    """Return ``value`` as a finite SI float of the given kind.

    ``value`` may be an int/float (already in the base unit) or a string such as
    ``"2.45 GHz"``. Raises ``ValueError`` naming the accepted units on anything else.
    """
    units = _UNITS[kind]
    if isinstance(value, bool):
        raise ValueError(f"expected a {kind} such as {_example(kind)}, got {value!r}")
    if isinstance(value, (int, float)):
        number = float(value)
    elif isinstance(value, str):
        match = _QUANTITY.match(value)
        if not match:
            raise ValueError(f"expected a {kind} such as {_example(kind)}, got {value!r}")
        number = float(match.group(1))
        unit = (match.group(2) or "").strip()
        if unit:
            factor = units.get(unit.lower())
            if factor is None:
                allowed = ", ".join(sorted({_pretty(u) for u in units}))
                raise ValueError(f"unknown {kind} unit {unit!r} in {value!r} (allowed: {allowed})")
            number *= factor
    else:
        raise ValueError(f"expected a {kind} such as {_example(kind)}, got {value!r}")
    if not math.isfinite(number):
        raise ValueError(f"{kind} must be finite, got {value!r}")
    return number


def format_frequency(hz: float) -> str:
    """Short human form of a frequency: 2.45 GHz, 915 MHz, 12.5 kHz."""
    for factor, symbol in ((1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz")):
        if abs(hz) >= factor:
            return f"{hz / factor:.6g} {symbol}"
    return f"{hz:.6g} Hz"


def format_duration(seconds: float) -> str:
    """Short human form of a duration: 42 s, 12.5 min, 3.2 h, 2.1 d."""
    for factor, symbol in ((86400.0, "d"), (3600.0, "h"), (60.0, "min")):
        if abs(seconds) >= factor:
            return f"{seconds / factor:.3g} {symbol}"
    return f"{seconds:.3g} s"


def _example(kind: str) -> str:
    return {
        "frequency": "'2.45 GHz'", "power": "'-10 dBm'", "time": "'90 s' or '8 h'",
        "decibel": "'10 dB'", "impedance": "'50 ohm'", "capacitance": "'50 fF'",
        "inductance": "'5 pH'", "angle": "'45 deg'", "length": "'0.3 m' or '12 ft'",
    }[kind]


def _pretty(unit: str) -> str:
    special = {"hz": "Hz", "khz": "kHz", "mhz": "MHz", "ghz": "GHz", "thz": "THz",
               "dbm": "dBm", "db": "dB", "pf": "pF", "ff": "fF", "nf": "nF",
               "nh": "nH", "ph": "pH", "uh": "uH", "µh": "µH", "f": "F", "h": "H"}
    return special.get(unit, unit)
