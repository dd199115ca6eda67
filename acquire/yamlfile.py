"""Safe YAML loading and key-path aware validation for every config file acquire reads.

``load_yaml`` reads one document with the bounded loader in ``drivers.yamltext`` and
turns any failure into one line naming the file (and line, for syntax errors). ``Node``
is the shared validating node (``drivers.yamlnode.YamlNode``) with ``ConfigError`` as
its default error and engineering quantities ("2.45 GHz") added:

    plan lines/patch.yaml: stimulus.points: must be an integer from 1 to 200001, got 'abc'
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from acquire.errors import ConfigError
from acquire.units import BASE_SYMBOL, parse_quantity
from drivers.yamlnode import MISSING, YamlNode, show
from drivers.yamltext import load_yaml_file

__all__ = ["MISSING", "Node", "load_yaml", "show"]


def load_yaml(path: Path | str, what: str, error: type[ConfigError] = ConfigError) -> Any:
    """Load one YAML document safely; ``what`` names the kind of file in messages."""
    path = Path(path)
    return load_yaml_file(path, f"{what} {path}", error)


# Default bounds (magnitude) per kind when a field gives none: a time or frequency beyond
# these is a typing slip, and would overflow the date and time types later.
KIND_LIMITS = {"time": 100 * 366 * 86400.0, "frequency": 1e15}


class Node(YamlNode):
    """A value from a config file, with the file, its key path and typed accessors."""

    default_error = ConfigError

    def quantity(
        self, kind: str, default: Any = MISSING, *, lo: float | None = None,
        hi: float | None = None, positive: bool = False,
    ) -> Any:
        """An engineering quantity ("2.45 GHz", "-10 dBm"); bare numbers are base units."""
        if not self.present and default is not MISSING:
            return default
        self.require()
        if isinstance(self.value, (int, float)) and not isinstance(self.value, bool):
            number = self.as_float()
        elif isinstance(self.value, str) and len(self.value) > 64:
            self.fail(f"expected a {kind} such as 10 {BASE_SYMBOL[kind]}, got {show(self.value)}")
        else:
            try:
                number = parse_quantity(self.value, kind)
            except (ValueError, OverflowError) as exc:
                self.fail(str(exc) if isinstance(exc, ValueError) else "number out of range")
        unit = f" {BASE_SYMBOL[kind]}"
        self.check_number(number, lo, hi, positive, unit)  # the field's own range first
        limit = KIND_LIMITS.get(kind)
        if limit is not None:
            self.check_number(number, -limit if lo is None else lo,
                              limit if hi is None else hi, positive, unit)
        return number
