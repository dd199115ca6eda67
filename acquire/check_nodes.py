"""Small readers of plan-check entries shared by the one-port and two-port check parsers."""

from __future__ import annotations

from acquire.units import format_frequency
from acquire.yamlfile import Node


def freq_pair(node: Node) -> tuple[float, float]:
    """A [low, high] frequency pair, low not above high; errors name the key path."""
    items = node.elements(min_len=2)
    if len(items) != 2:
        node.fail(f"must be a pair [low, high], got {len(items)} values")
    lo = items[0].quantity("frequency", lo=0.0)
    hi = items[1].quantity("frequency", lo=0.0)
    if hi < lo:
        node.fail(f"low end {format_frequency(lo)} lies above high end {format_frequency(hi)}")
    return lo, hi
