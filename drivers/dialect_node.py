"""A value from a dialect file with its key path, for checks that name where they failed."""

from __future__ import annotations

import math
from typing import Any, NoReturn

from drivers.errors import DialectError
from drivers.templates import Template, TemplateProblem, check_token

MISSING = object()
_MISSING = MISSING


class Node:
    """A value from the file with its key path, for checks that name where they failed."""

    def __init__(self, value: Any, source: str, path: str = "") -> None:
        self.value = value
        self.source = source
        self.path = path

    @property
    def present(self) -> bool:
        return self.value is not _MISSING and self.value is not None

    def __getitem__(self, key: str | int) -> Node:
        if isinstance(key, int):
            items = self.value if isinstance(self.value, list) else []
            value = items[key] if key < len(items) else _MISSING
            return Node(value, self.source, f"{self.path}[{key}]")
        value = self.value.get(key, _MISSING) if isinstance(self.value, dict) else _MISSING
        return Node(value, self.source, f"{self.path}.{key}" if self.path else key)

    def fail(self, message: str) -> NoReturn:
        where = f"{self.path}: " if self.path else ""
        raise DialectError(f"{self.source}: {where}{message}")

    def mapping(self, allowed: tuple[str, ...], required: tuple[str, ...] = ()) -> Node:
        if not isinstance(self.value, dict):
            self.fail(f"must be a mapping, got {_show(self.value)}")
        for key in self.value:
            if key not in allowed:
                self.fail(f"unknown key {_show(key)}; allowed: {', '.join(allowed)}")
        for key in required:
            if not self[key].present:
                self[key].fail("is required")
        return self

    def elements(self) -> list[Node]:
        if not isinstance(self.value, list):
            self.fail(f"must be a list, got {_show(self.value)}")
        return [self[i] for i in range(len(self.value))]

    def text(self, default: Any = _MISSING, choices: tuple[str, ...] | None = None) -> Any:
        if not self.present:
            if default is not _MISSING:
                return default
            self.fail("is required")
        if not isinstance(self.value, str) or not (self.value.strip() or choices):
            self.fail(f"must be a non-empty string, got {_show(self.value)}")
        if choices is not None and self.value not in choices:
            shown = ", ".join(c if c.isprintable() else repr(c) for c in choices)
            self.fail(f"must be one of {shown}, got {_show(self.value)}")
        return self.value

    def number(self, default: Any = _MISSING, lo: float = -math.inf, positive: bool = False) -> Any:
        if not self.present:
            if default is not _MISSING:
                return default
            self.fail("is required")
        value = self.value
        if isinstance(value, str):  # YAML 1.1 reads 1.0e6 (no exponent sign) as text
            try:
                value = float(value)
            except ValueError:
                self.fail(f"must be a finite number, got {_show(value)}")
        if (
            isinstance(value, bool)
            or not isinstance(value, (int, float))
            or not math.isfinite(value)
        ):
            self.fail(f"must be a finite number, got {_show(value)}")
        if value < lo or (positive and value <= 0):
            self.fail(f"must be {'above' if positive else 'at least'} {lo:g}, got {value!r}")
        return float(value)

    def integer(self, default: Any = _MISSING, lo: int | None = None, hi: int | None = None) -> Any:
        if not self.present:
            if default is not _MISSING:
                return default
            self.fail("is required")
        value = self.value
        if isinstance(value, bool) or not isinstance(value, int):
            self.fail(f"must be an integer, got {_show(value)}")
        if (lo is not None and value < lo) or (hi is not None and value > hi):
            self.fail(f"must be an integer from {lo} to {hi}, got {value}")
        return int(value)

    def boolean(self, default: Any = _MISSING) -> Any:
        if not self.present:
            if default is not _MISSING:
                return default
            self.fail("is required")
        if not isinstance(self.value, bool):
            self.fail(f"must be true or false, got {_show(self.value)}")
        return self.value

    def template(
        self, fields: tuple[str, ...] = (), *, query: bool, require: tuple[str, ...] = ()
    ) -> Template:
        """A command (``query=False``) or query template using only ``fields``."""
        text = self.text()
        try:
            template = Template.parse(text, frozenset(fields))
        except TemplateProblem as exc:
            self.fail(str(exc))
        if query and not template.is_query:
            self.fail(f"a query template must contain '?', got {text!r}")
        if not query and template.is_query:
            self.fail(
                f"a command template must not contain '?' (a reply would go unread), got {text!r}"
            )
        for name in require:
            if name not in template.fields:
                self.fail(f"template must use {{{name}}}, got {text!r}")
        return template

    def optional_template(self, fields: tuple[str, ...] = (), *, query: bool) -> Template | None:
        return self.template(fields, query=query) if self.present else None

    def templates(self, fields: tuple[str, ...] = (), *, query: bool) -> tuple[Template, ...]:
        """One template or a list of them (sent in order)."""
        if isinstance(self.value, list):
            if not self.value:
                self.fail("must hold at least one command")
            return tuple(n.template(fields, query=query) for n in self.elements())
        return (self.template(fields, query=query),)

    def token(self, what: str = "token") -> str:
        if not self.present:
            self.fail("is required")
        try:
            return check_token(self.value, what)
        except TemplateProblem as exc:
            self.fail(str(exc))


def _show(value: Any) -> str:
    if value is _MISSING:
        return "nothing"
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."
