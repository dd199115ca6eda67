"""The dialect reader's node: the shared ``YamlNode`` plus command templates and tokens.

Every check of a dialect file goes through ``drivers.yamlnode`` (one validator for every
file kind); this subclass only adds what is particular to dialects and raises
``DialectError``.
"""

from __future__ import annotations

from drivers.errors import DialectError
from drivers.templates import Template, TemplateProblem, check_token
from drivers.yamlnode import MISSING, YamlNode, show

__all__ = ["MISSING", "Node"]


class Node(YamlNode):
    """A value from a dialect file with its key path (see ``YamlNode``)."""

    default_error = DialectError

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
            self.fail(f"a query template must contain '?', got {show(text)}")
        if not query and template.is_query:
            self.fail(
                "a command template must not contain '?' (a reply would go unread), "
                f"got {show(text)}"
            )
        for name in require:
            if name not in template.fields:
                self.fail(f"template must use {{{name}}}, got {show(text)}")
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
        self.require()
        if not isinstance(self.value, str):  # shown bounded, however large the value
            self.fail(f"{what} must be a non-empty string, got {show(self.value)}")
        try:
            return check_token(self.value, what)
        except TemplateProblem as exc:
            self.fail(str(exc))
