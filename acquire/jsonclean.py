"""Values made fit for JSON: one clean-up for every file and message sweepd writes.

JSON has no NaN or infinity, so a quantity that could not be computed (a resonance
outside the sweep, a drift before the reference) is written as ``null``; numpy scalars
and arrays become plain numbers and lists, tuples lists, mapping keys strings. Files are
then written with ``allow_nan=False`` so nothing non-finite can slip through.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from typing import Any

import numpy as np


def finite_or_none(value: Any) -> float | None:
    """``float(value)``, or ``None`` for ``None``, NaN and infinities."""
    if value is None:
        return None
    number = float(value)
    return number if math.isfinite(number) else None


def json_safe(value: Any) -> Any:
    """``value`` with NaN and infinities as ``None``, numpy values as plain Python."""
    if isinstance(value, Mapping):
        return {str(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_safe(v) for v in value]
    if isinstance(value, np.ndarray):
        return json_safe(value.tolist())
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return finite_or_none(value)
    return value


def json_text(value: Any, **options: Any) -> str:
    """``json.dumps`` of ``json_safe(value)``, refusing anything still non-finite."""
    return json.dumps(json_safe(value), allow_nan=False, **options)
