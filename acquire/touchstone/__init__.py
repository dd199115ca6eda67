"""Touchstone files (.sNp, .ts): read versions 1.0, 1.1, 2.0 and 2.1; write 1.1 and 2.0.

References: Touchstone File Format Specification 2.0 (IBIS Open Forum, 2009) and 2.1
(which names 1.1, makes ``[End]`` required and suggests ``.ts``).

>>> from acquire.touchstone import write_touchstone, read_touchstone, TouchstoneOptions
>>> path = write_touchstone("out/A0042.s1p", sweep, TouchstoneOptions(fmt="DB"))
>>> back = read_touchstone(path).to_sweep()
"""

from .model import NoiseData, TouchstoneFile, TouchstoneOptions
from .reader import parse_touchstone, ports_from_name, read_touchstone
from .writer import format_touchstone, write_touchstone

__all__ = [
    "NoiseData",
    "TouchstoneFile",
    "TouchstoneOptions",
    "format_touchstone",
    "parse_touchstone",
    "ports_from_name",
    "read_touchstone",
    "write_touchstone",
]
