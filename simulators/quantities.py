"""Read engineering quantities from cal kit files ("29.0 ps", "50 ohm", "18 GHz").

Written independently of the host-side unit parser on purpose. Bare numbers are SI.
"""

from __future__ import annotations

import math
import re

_NUMBER = re.compile(r"^\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*([^\s\d].*?)?\s*$")

_FACTORS: dict[str, dict[str, float]] = {
    "time": {"s": 1.0, "ms": 1e-3, "us": 1e-6, "ns": 1e-9, "ps": 1e-12, "fs": 1e-15},
    "frequency": {"hz": 1.0, "khz": 1e3, "mhz": 1e6, "ghz": 1e9, "thz": 1e12},
    "impedance": {"ohm": 1.0, "ω": 1.0, "kohm": 1e3},
}


def quantity(value: object, kind: str, where: str) -> float:
    """``value`` (a number or a string with a unit of ``kind``) as a finite SI float.

    ``where`` names the file and key for the error message.
    """
    from simulators.errors import SimError

    if isinstance(value, bool) or value is None:
        raise SimError(f"{where}: expected a {kind}, got {value!r}")
    if isinstance(value, (int, float)):
        number = float(value)
    elif isinstance(value, str):
        match = _NUMBER.match(value)
        if not match:
            raise SimError(f"{where}: expected a {kind} such as '29 ps', got {value!r}")
        number = float(match.group(1))
        unit = (match.group(2) or "").strip().lower()
        if unit:
            factor = _FACTORS[kind].get(unit)
            if factor is None:
                allowed = ", ".join(_FACTORS[kind])
                raise SimError(f"{where}: unknown {kind} unit {unit!r} (allowed: {allowed})")
            number *= factor
    else:
        raise SimError(f"{where}: expected a {kind}, got {value!r}")
    if not math.isfinite(number):
        raise SimError(f"{where}: {kind} must be finite, got {value!r}")
    return number


def plain_number(value: object, where: str) -> float:
    """A bare finite number (polynomial coefficients, loss in GΩ/s)."""
    from simulators.errors import SimError

    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise SimError(f"{where}: expected a number, got {value!r}")
    if not math.isfinite(value):
        raise SimError(f"{where}: must be finite, got {value!r}")
    return float(value)
