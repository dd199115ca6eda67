"""Safe YAML loading and key-path aware validation for every config file we read.

``load_yaml`` reads with ``yaml.safe_load`` and turns any failure into one line naming
the file (and line, for syntax errors). ``Node`` wraps a loaded value with its key path,
so validators can say exactly where a problem is:

    plan lines/patch.yaml: stimulus.points: must be an integer from 1 to 200001, got 'abc'
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable
from pathlib import Path
from typing import Any, NoReturn

from acquire.errors import ConfigError
from acquire.units import parse_quantity
from drivers.yamltext import load_yaml_file

_MISSING = object()


def load_yaml(path: Path | str, what: str, error: type[ConfigError] = ConfigError) -> Any:
    """Load one YAML document safely; ``what`` names the kind of file in messages."""
    path = Path(path)
    return load_yaml_file(path, f"{what} {path}", error)


class Node:
    """A value from a config file, with the file, its key path and typed accessors."""

    def __init__(
        self,
        value: Any,
        source: str,
        path: str = "",
        error: type[ConfigError] = ConfigError,
        base_dir: Path | None = None,
    ) -> None:
        self.value = value
        self.source = source  # e.g. "plan lines/patch.yaml"
        self.path = path
        self.error = error
        self.base_dir = base_dir

    # -- navigation ---------------------------------------------------------------
    @property
    def present(self) -> bool:
        return self.value is not _MISSING

    def child(self, key: str | int) -> Node:
        mapping = self.value if isinstance(self.value, (dict, list)) else {}
        if isinstance(key, int):
            value = mapping[key] if isinstance(mapping, list) and key < len(mapping) else _MISSING
            sub = f"{self.path}[{key}]"
        else:
            value = mapping.get(key, _MISSING) if isinstance(mapping, dict) else _MISSING
            sub = f"{self.path}.{key}" if self.path else key
        return Node(value, self.source, sub, self.error, self.base_dir)

    def __getitem__(self, key: str | int) -> Node:
        return self.child(key)

    def fail(self, message: str) -> NoReturn:
        where = f"{self.path}: " if self.path else ""
        raise self.error(f"{self.source}: {where}{message}")

    def require(self) -> Node:
        if not self.present or self.value is None:
            self.fail("is required")
        return self

    # -- shapes -------------------------------------------------------------------
    def mapping(
        self, allowed: Iterable[str], required: Iterable[str] = (), *, optional: bool = False
    ) -> Node:
        """Check this is a mapping with only ``allowed`` keys and all ``required`` ones."""
        if not self.present and optional:
            return self
        if not isinstance(self.value, dict):
            self.fail(f"must be a mapping of keys, got {_show(self.value)}")
        allowed = list(allowed)
        for key in self.value:
            if not isinstance(key, str) or key not in allowed:
                hint = difflib.get_close_matches(str(key), allowed, n=1)
                also = f" (did you mean '{hint[0]}'?)" if hint else ""
                self.fail(f"unknown key '{key}'{also}; allowed: {', '.join(allowed)}")
        for key in required:
            if key not in self.value:
                self.child(key).fail("is required")
        return self

    def items(self) -> list[tuple[str, Node]]:
        if not isinstance(self.value, dict):
            self.fail(f"must be a mapping, got {_show(self.value)}")
        return [(str(k), self.child(str(k))) for k in self.value]

    def elements(self, *, min_len: int = 0) -> list[Node]:
        if not isinstance(self.value, list):
            self.fail(f"must be a list, got {_show(self.value)}")
        if len(self.value) < min_len:
            self.fail(f"must hold at least {min_len} entr{'y' if min_len == 1 else 'ies'}")
        return [self.child(i) for i in range(len(self.value))]

    # -- scalars ------------------------------------------------------------------
    def text(self, default: Any = _MISSING, *, choices: Iterable[str] | None = None) -> str:
        if not self.present and default is not _MISSING:
            return default
        self.require()
        if not isinstance(self.value, str) or not self.value.strip():
            self.fail(f"must be a non-empty string, got {_show(self.value)}")
        if choices is not None:
            choices = list(choices)
            if self.value not in choices:
                self.fail(f"must be one of {', '.join(choices)}, got {_show(self.value)}")
        return self.value

    def integer(
        self, default: Any = _MISSING, *, lo: int | None = None, hi: int | None = None
    ) -> int:
        if not self.present and default is not _MISSING:
            return default
        self.require()
        value = self.value
        if isinstance(value, bool) or not isinstance(value, int):
            self.fail(f"must be an integer{_range(lo, hi)}, got {_show(value)}")
        if (lo is not None and value < lo) or (hi is not None and value > hi):
            self.fail(f"must be an integer{_range(lo, hi)}, got {value}")
        return int(value)

    def number(
        self, default: Any = _MISSING, *, lo: float | None = None, hi: float | None = None
    ) -> float:
        if not self.present and default is not _MISSING:
            return default
        self.require()
        if isinstance(self.value, bool) or not isinstance(self.value, (int, float)):
            self.fail(f"must be a number{_range(lo, hi)}, got {_show(self.value)}")
        return self._in_range(float(self.value), lo, hi, "")

    def boolean(self, default: Any = _MISSING) -> bool:
        if not self.present and default is not _MISSING:
            return default
        self.require()
        if not isinstance(self.value, bool):
            self.fail(f"must be true or false, got {_show(self.value)}")
        return self.value

    def quantity(
        self, kind: str, default: Any = _MISSING, *, lo: float | None = None,
        hi: float | None = None,
    ) -> float:
        """An engineering quantity ("2.45 GHz", "-10 dBm"); bare numbers are base units."""
        if not self.present and default is not _MISSING:
            return default
        self.require()
        try:
            number = parse_quantity(self.value, kind)
        except ValueError as exc:
            self.fail(str(exc))
        return self._in_range(number, lo, hi, kind)

    def file_path(self, default: Any = _MISSING) -> Path:
        """A path; relative ones are taken from the folder of the file being read."""
        raw = self.text(default)
        if raw is default and not self.present:
            return default
        path = Path(raw).expanduser()
        if not path.is_absolute() and self.base_dir is not None:
            path = self.base_dir / path
        return path

    def _in_range(self, number: float, lo: float | None, hi: float | None, kind: str) -> float:
        if (lo is not None and number < lo) or (hi is not None and number > hi):
            from acquire.units import BASE_SYMBOL

            unit = f" {BASE_SYMBOL[kind]}" if kind else ""
            self.fail(f"must be{_range(lo, hi, unit)}, got {_show(self.value)}")
        return number


def _range(lo: float | None, hi: float | None, unit: str = "") -> str:
    if lo is not None and hi is not None:
        return f" from {lo:g}{unit} to {hi:g}{unit}"
    if lo is not None:
        return f" at least {lo:g}{unit}"
    if hi is not None:
        return f" at most {hi:g}{unit}"
    return ""


def _show(value: Any) -> str:
    if value is _MISSING:
        return "nothing"
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."
