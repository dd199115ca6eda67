"""JSON from files we did not write ourselves this run, read within bounds.

``loads_bounded`` refuses NaN/Infinity, numbers beyond a float, integers of more than
19 digits and nesting deeper than a limit, raising ``ValueError`` with a short reason
(never ``RecursionError`` or a traceback). Used for cal set headers, spool job files and
metadata in Touchstone comments.
"""

from __future__ import annotations

import json
import math
from typing import Any

MAX_INT_DIGITS = 19
MAX_DEPTH = 16


def loads_bounded(text: str | bytes, max_depth: int = MAX_DEPTH) -> Any:
    """``json.loads`` with finite numbers, bounded integers and at most ``max_depth`` levels."""
    deep = f"nested deeper than {max_depth} levels"
    try:
        value = json.loads(text, parse_constant=_no_constant, parse_int=_bounded_int,
                           parse_float=_finite_float)
    except RecursionError:
        raise ValueError(deep) from None
    if depth(value) > max_depth:
        raise ValueError(deep)
    return value


def depth(value: Any) -> int:
    """Nesting depth of a parsed JSON value (a scalar is 0, ``[]`` is 1)."""
    level_depth, level = 0, [value]
    while True:
        containers = [item for item in level if isinstance(item, (dict, list))]
        if not containers:
            return level_depth
        level_depth += 1
        level = [child for item in containers
                 for child in (item.values() if isinstance(item, dict) else item)]


def _no_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a finite number")


def _bounded_int(text: str) -> int:
    digits = len(text.lstrip("-"))
    if digits > MAX_INT_DIGITS:
        raise ValueError(f"an integer of {digits} digits")
    return int(text)


def _finite_float(text: str) -> float:
    value = float(text)
    if not math.isfinite(value):
        raise ValueError(f"{text[:30]} is beyond a finite number")
    return value
