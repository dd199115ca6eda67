"""A validating view of a loaded YAML document: key paths, typed readers, bounded messages.

Every config file sweepd reads (dialects here; plans, masks, kits in ``acquire``) is
checked through ``YamlNode``, so every reader refuses the same things the same way:

    plan lines/patch.yaml: stimulus.points: must be an integer from 1 to 200001, got 'abc'

Rules shared by every file kind:

- A null (``key:`` with nothing after it, ``~``) counts as absent: optional keys take
  their default, required ones say "is required".
- Numbers are finite and inside a range: NaN, infinities, values beyond a float and
  integers with hundreds of digits are refused with one line. ``number()`` and
  ``integer()`` take ``lo``/``hi``; without them a default range still applies.
- Messages show at most ``SHOW_LIMIT`` characters of a value and are one line, however
  large, deep or oddly written (newlines, control characters) the value is.

The error class is the caller's: ``YamlNode(raw, "dialect x.yaml", error=DialectError)``.
"""

from __future__ import annotations

import copy
import difflib
import math
import re
from collections.abc import Iterable
from pathlib import Path
from typing import Any, NoReturn, TypeVar

from drivers.errors import SweepdError

SHOW_LIMIT = 60
INTEGER_LIMIT = 2**63 - 1  # default range of integer() when none is given
NUMBER_LIMIT = 1e300  # default range of number() when none is given
_NUMERIC_TEXT = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d{1,3})?")
_BIG_INT_BITS = 256  # integers wider than this are described, not printed

N = TypeVar("N", bound="YamlNode")


class _Missing:
    def __repr__(self) -> str:
        return "nothing"


MISSING: Any = _Missing()


class YamlNode:
    """A value from a file with its source, key path and typed, range-checked readers."""

    default_error: type[Exception] = SweepdError

    def __init__(
        self,
        value: Any,
        source: str,
        path: str = "",
        error: type[Exception] | None = None,
        base_dir: Path | None = None,
    ) -> None:
        self.value = value
        self.source = source  # e.g. "plan lines/patch.yaml"
        self.path = path
        self.error = error or self.default_error
        self.base_dir = base_dir

    # -- navigation ---------------------------------------------------------------
    @property
    def present(self) -> bool:
        """False for a missing key and for an explicit null."""
        return self.value is not MISSING and self.value is not None

    def child(self: N, key: str | int) -> N:
        """The node at ``key`` (a mapping key or list index); absent ones are MISSING."""
        if isinstance(key, int):
            items = self.value if isinstance(self.value, list) else []
            value = items[key] if 0 <= key < len(items) else MISSING
            sub = f"{self.path}[{key}]"
        else:
            value = self.value.get(key, MISSING) if isinstance(self.value, dict) else MISSING
            sub = f"{self.path}.{key}" if self.path else key
        return self.at(value, sub)

    def at(self: N, value: Any, path: str) -> N:
        """A node of the same kind (and error class) for ``value`` at key path ``path``."""
        node = copy.copy(self)
        node.value = value
        node.path = path
        return node

    def __getitem__(self: N, key: str | int) -> N:
        return self.child(key)

    def fail(self, message: str) -> NoReturn:
        """Raise the node's error class with "<source>: <path>: <message>" on one line."""
        where = f"{self.path}: " if self.path else ""
        raise self.error(one_line(f"{self.source}: {where}{message}"))

    def require(self: N) -> N:
        if not self.present:
            self.fail("is required")
        return self

    # -- shapes -------------------------------------------------------------------
    def mapping(
        self: N, allowed: Iterable[str], required: Iterable[str] = (), *, optional: bool = False
    ) -> N:
        """Check this is a mapping with only ``allowed`` keys and all ``required`` ones."""
        if not self.present and optional:
            return self
        if not isinstance(self.value, dict):
            self.fail(f"must be a mapping of keys, got {show(self.value)}")
        allowed = list(allowed)
        for key in self.value:
            if not isinstance(key, str) or key not in allowed:
                hint = difflib.get_close_matches(key, allowed, n=1) if _short(key) else []
                also = f" (did you mean '{hint[0]}'?)" if hint else ""
                self.fail(f"unknown key {show(key)}{also}; allowed: {', '.join(allowed)}")
        for key in required:
            self.child(key).require()
        return self

    def items(self: N) -> list[tuple[str, N]]:
        if not isinstance(self.value, dict):
            self.fail(f"must be a mapping, got {show(self.value)}")
        for key in self.value:
            if not isinstance(key, str):
                self.fail(f"keys must be text, got {show(key)}")
        return [(key, self.child(key)) for key in self.value]

    def elements(self: N, *, min_len: int = 0, max_len: int | None = None) -> list[N]:
        if not isinstance(self.value, list):
            self.fail(f"must be a list, got {show(self.value)}")
        if len(self.value) < min_len:
            self.fail(f"must hold at least {min_len} entr{'y' if min_len == 1 else 'ies'}")
        if max_len is not None and len(self.value) > max_len:
            self.fail(f"must hold at most {max_len} entries, got {len(self.value)}")
        return [self.child(i) for i in range(len(self.value))]

    # -- scalars ------------------------------------------------------------------
    def text(
        self, default: Any = MISSING, *, choices: Iterable[str] | None = None,
        max_len: int = 4096,
    ) -> Any:
        """A string (non-blank unless ``choices`` allow it), at most ``max_len`` long."""
        if not self.present and default is not MISSING:
            return default
        self.require()
        value = self.value
        if not isinstance(value, str) or not (value.strip() or choices is not None):
            self.fail(f"must be a non-empty string, got {show(value)}")
        if choices is not None:
            choices = list(choices)
            if value not in choices:
                shown = ", ".join(c if c.isprintable() else repr(c) for c in choices)
                self.fail(f"must be one of {shown}, got {show(value)}")
        if len(value) > max_len:
            self.fail(f"must be at most {max_len} characters, got {len(value)}")
        return value

    def integer(
        self, default: Any = MISSING, *, lo: int | None = None, hi: int | None = None
    ) -> Any:
        """A whole number in ``[lo, hi]`` (default ±(2**63 - 1))."""
        if not self.present and default is not MISSING:
            return default
        self.require()
        value = self.value
        low = -INTEGER_LIMIT if lo is None else lo
        high = INTEGER_LIMIT if hi is None else hi
        if isinstance(value, bool) or not isinstance(value, int):
            self.fail(f"must be an integer{_range(lo, hi)}, got {show(value)}")
        if not low <= value <= high:
            self.fail(f"must be an integer{_range(lo, hi) or ' of at most 19 digits'}, "
                      f"got {show(value)}")
        return int(value)

    def number(
        self, default: Any = MISSING, *, lo: float | None = None, hi: float | None = None,
        positive: bool = False,
    ) -> Any:
        """A finite number in ``[lo, hi]`` (above 0 when ``positive``) as a float.

        A numeric string such as ``1e6`` (YAML 1.1 reads it as text) is accepted.
        """
        if not self.present and default is not MISSING:
            return default
        self.require()
        return self.check_number(self.as_float(), lo, hi, positive)

    def as_float(self) -> float:
        """This value as a finite float, or one line saying it is not a finite number."""
        value = self.value
        if isinstance(value, str) and len(value) <= 40 and _NUMERIC_TEXT.fullmatch(value):
            value = float(value)
        if isinstance(value, int) and not isinstance(value, bool):
            if value.bit_length() > 1000:
                self.fail(f"must be a finite number, got {show(value)}")
            value = float(value)
        if not isinstance(value, float):
            self.fail(f"must be a number, got {show(self.value)}")
        if not math.isfinite(value):
            self.fail(f"must be a finite number, got {show(self.value)}")
        return value

    def check_number(
        self, number: float, lo: float | None, hi: float | None, positive: bool = False,
        unit: str = "",
    ) -> float:
        """``number`` if it is finite and inside the range, else one line naming the range."""
        low = -NUMBER_LIMIT if lo is None else lo
        high = NUMBER_LIMIT if hi is None else hi
        if not math.isfinite(number):
            self.fail(f"must be a finite number, got {show(self.value)}")
        if positive and number <= 0:
            self.fail(f"must be above 0{unit}, got {show(self.value)}")
        if not low <= number <= high:
            self.fail(f"must be{_range(lo, hi, unit) or ' a smaller number'}, "
                      f"got {show(self.value)}")
        return number

    def boolean(self, default: Any = MISSING) -> Any:
        if not self.present and default is not MISSING:
            return default
        self.require()
        if not isinstance(self.value, bool):
            self.fail(f"must be true or false, got {show(self.value)}")
        return self.value

    def file_path(self, default: Any = MISSING) -> Any:
        """A path; relative ones are taken from the folder of the file being read."""
        if not self.present and default is not MISSING:
            return default
        raw = self.text()
        if "\x00" in raw:
            self.fail("must not contain a NUL character")
        path = Path(raw).expanduser()
        if not path.is_absolute() and self.base_dir is not None:
            path = self.base_dir / path
        return path


def _range(lo: float | None, hi: float | None, unit: str = "") -> str:
    if lo is not None and hi is not None:
        return f" from {lo:g}{unit} to {hi:g}{unit}"
    if lo is not None:
        return f" at least {lo:g}{unit}"
    if hi is not None:
        return f" at most {hi:g}{unit}"
    return ""


def _short(key: Any) -> bool:
    return isinstance(key, str) and len(key) <= 64


def one_line(text: str) -> str:
    """``text`` with line breaks and other control characters escaped (one line)."""
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in text)


def show(value: Any, limit: int = SHOW_LIMIT) -> str:
    """A one-line rendering of ``value`` cut near ``limit`` characters.

    Never renders more of a value than it shows: a large or deeply nested value (a
    YAML alias bomb) costs no more than a small one.
    """
    if value is MISSING:
        return "nothing"
    parts: list[str] = []
    _render(value, parts, [limit + 1], 0)
    text = "".join(parts)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _render(value: Any, out: list[str], budget: list[int], depth: int) -> None:
    """Append pieces of ``value``'s rendering to ``out`` until ``budget[0]`` runs out."""
    if budget[0] <= 0:
        return
    if isinstance(value, (list, tuple, set, frozenset, dict)):
        _render_container(value, out, budget, depth)
        return
    if isinstance(value, str):
        piece = one_line(repr(value[: budget[0] + 1]))
    elif isinstance(value, bytes):
        piece = repr(value[: budget[0] + 1])
    elif isinstance(value, int) and not isinstance(value, bool) \
            and value.bit_length() > _BIG_INT_BITS:
        piece = f"an integer of {_digits(value)} digits"
    elif value is None or isinstance(value, (bool, int, float)):
        piece = repr(value)
    else:
        piece = f"a {type(value).__name__}"
    out.append(piece)
    budget[0] -= len(piece)


def _digits(value: int) -> int:
    """Decimal digits of a large ``value`` without ``str()`` (quadratic, and capped)."""
    size = abs(value)
    digits = int(size.bit_length() * math.log10(2))  # within one of the answer
    return digits + 1 if size >= 10**digits else digits


def _render_container(value: Any, out: list[str], budget: list[int], depth: int) -> None:
    opening, closing = ("{", "}") if isinstance(value, dict) else ("[", "]")
    if depth >= 8:
        out.append(opening + "..." + closing)
        budget[0] -= 5
        return
    out.append(opening)
    budget[0] -= 1
    for index, item in enumerate(value.items() if isinstance(value, dict) else value):
        if budget[0] <= 0:
            return
        if index:
            out.append(", ")
            budget[0] -= 2
        if isinstance(value, dict):
            _render(item[0], out, budget, depth + 1)
            out.append(": ")
            budget[0] -= 2
            _render(item[1], out, budget, depth + 1)
        else:
            _render(item, out, budget, depth + 1)
    out.append(closing)
    budget[0] -= 1
