"""Reading and validating dialect files; every problem is one line naming file and key.

    dialect configs/dialects/x.yaml: settings.start.set: template may only use {value}, found {cmd}

The schema is documented in configs/dialects/README.md; keep the two in step.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any, NoReturn

from drivers.blocks import BYTE_ORDERS, ENCODINGS
from drivers.dialect_model import (
    REQUIRED_SETTINGS,
    SETTING_NAMES,
    STANDARDS,
    SWITCH_REPLIES,
    WAIT_MODES,
    ByteOrders,
    DataFormat,
    Dialect,
    SettingSpec,
    SwitchSpec,
    shown_path,
)
from drivers.errors import DialectError
from drivers.layouts import LAYOUTS
from drivers.stimulus import S_PARAMETERS
from drivers.templates import Template, TemplateProblem, check_token
from drivers.yamltext import load_yaml_file

_MISSING = object()
TERMINATORS = ("\n", "\r\n", "\r")
TOP_KEYS = (
    "dialect",
    "description",
    "terminators",
    "session",
    "settings",
    "data",
    "trigger",
    "errors",
    "switch",
)


class _Node:
    """A value from the file with its key path, for checks that name where they failed."""

    def __init__(self, value: Any, source: str, path: str = "") -> None:
        self.value = value
        self.source = source
        self.path = path

    @property
    def present(self) -> bool:
        return self.value is not _MISSING and self.value is not None

    def __getitem__(self, key: str | int) -> _Node:
        if isinstance(key, int):
            items = self.value if isinstance(self.value, list) else []
            value = items[key] if key < len(items) else _MISSING
            return _Node(value, self.source, f"{self.path}[{key}]")
        value = self.value.get(key, _MISSING) if isinstance(self.value, dict) else _MISSING
        return _Node(value, self.source, f"{self.path}.{key}" if self.path else key)

    def fail(self, message: str) -> NoReturn:
        where = f"{self.path}: " if self.path else ""
        raise DialectError(f"{self.source}: {where}{message}")

    def mapping(self, allowed: tuple[str, ...], required: tuple[str, ...] = ()) -> _Node:
        if not isinstance(self.value, dict):
            self.fail(f"must be a mapping, got {_show(self.value)}")
        for key in self.value:
            if key not in allowed:
                self.fail(f"unknown key {_show(key)}; allowed: {', '.join(allowed)}")
        for key in required:
            if not self[key].present:
                self[key].fail("is required")
        return self

    def elements(self) -> list[_Node]:
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


def parse_dialect_file(path: Path) -> Dialect:
    """Load ``path`` with ``yaml.safe_load`` and validate it into a ``Dialect``."""
    raw = load_yaml_file(path, f"dialect {shown_path(path)}", DialectError)
    return parse_dialect(raw, path)


def parse_dialect(raw: Any, path: Path) -> Dialect:
    """Validate an already loaded YAML document (``path`` is used in messages)."""
    root = _Node(raw, f"dialect {shown_path(path)}")
    root.mapping(TOP_KEYS, required=("dialect", "session", "settings", "data", "trigger", "errors"))
    name = root["dialect"].token("dialect name")
    terms = root["terminators"]
    write_term, read_term = "\n", "\n"
    if terms.present:
        terms.mapping(("write", "read"))
        write_term = terms["write"].text("\n", choices=TERMINATORS)
        read_term = terms["read"].text("\n", choices=TERMINATORS)
    session = root["session"].mapping(
        ("identity", "clear", "opening", "opc_query", "opc_after_setting"),
        required=("identity", "opc_query"),
    )
    opening = session["opening"]
    formats, format_query, byte_orders = _data_formats(root["data"])
    data = root["data"]
    frequency_query, frequency_scale = _frequency(data["frequency"])
    trigger = root["trigger"].mapping(
        ("command", "wait", "wai", "sweep_time_query"), required=("command", "wait")
    )
    wait = trigger["wait"].text(choices=WAIT_MODES)
    if wait == "wai" and not trigger["wai"].present:
        trigger["wai"].fail("is required when wait is 'wai'")
    errors = root["errors"].mapping(("query", "none_code", "max_entries"), required=("query",))
    return Dialect(
        name=name,
        path=path,
        description=root["description"].text(""),
        write_termination=write_term,
        read_termination=read_term,
        identity=session["identity"].template(query=True),
        clear=session["clear"].optional_template(query=False),
        opening=opening.templates(query=False) if opening.present and opening.value != [] else (),
        opc_query=session["opc_query"].template(query=True),
        opc_after_setting=session["opc_after_setting"].boolean(False),
        settings=_settings(root["settings"]),
        formats=formats,
        format_query=format_query,
        byte_orders=byte_orders,
        layout=data["layout"].text(choices=LAYOUTS),
        trace_query=data["trace_query"].template(("trace",), query=True, require=("trace",)),
        traces=_traces(data["traces"]),
        frequency_query=frequency_query,
        frequency_scale=frequency_scale,
        trigger=trigger["command"].template(query=False),
        wait=wait,
        wai=trigger["wai"].optional_template(query=False),
        sweep_time_query=trigger["sweep_time_query"].optional_template(query=True),
        error_query=errors["query"].template(query=True),
        error_none_code=errors["none_code"].integer(0, lo=-32768, hi=32767),
        error_max_entries=errors["max_entries"].integer(64, lo=1, hi=10_000),
        switch=_switch(root["switch"]) if root["switch"].present else None,
    )


def _settings(node: _Node) -> dict[str, SettingSpec]:
    node.mapping(SETTING_NAMES, required=REQUIRED_SETTINGS)
    specs = {}
    for name in SETTING_NAMES:
        entry = node[name]
        if not entry.present:
            continue
        keys = ("set", "query", "type", "unit_scale", "tolerance")
        if name == "averaging":
            keys += ("state",)
        entry.mapping(keys, required=("set", "query", "type"))
        kind = entry["type"].text(choices=("integer", "real"))
        if name == "points" and kind != "integer":
            entry["type"].fail("must be 'integer' for points")
        if kind == "integer" and entry["unit_scale"].present:
            entry["unit_scale"].fail("applies to real settings only")
        fields = ("value", "state") if name == "averaging" else ("value",)
        sets = entry["set"].templates(fields, query=False)
        if not any("value" in t.fields for t in sets):
            entry["set"].fail("at least one command must use {value}")
        tolerance = entry["tolerance"]
        absolute = relative = 0.0
        if tolerance.present:
            tolerance.mapping(("absolute", "relative"))
            absolute = tolerance["absolute"].number(0.0, lo=0.0)
            relative = tolerance["relative"].number(0.0, lo=0.0)
        state_on = state_off = None
        state_query = None
        uses_state = any("state" in t.fields for t in sets)
        state = entry["state"] if name == "averaging" else _Node(None, node.source)
        if state.present:
            state.mapping(("enabled", "disabled", "query"), required=("enabled", "disabled"))
            state_on = state["enabled"].token("state token")
            state_off = state["disabled"].token("state token")
            state_query = state["query"].optional_template(query=True)
        elif uses_state:
            entry["state"].fail("is required when a set command uses {state}")
        specs[name] = SettingSpec(
            name=name,
            set=sets,
            query=entry["query"].template(query=True),
            integer=kind == "integer",
            scale=entry["unit_scale"].number(1.0, positive=True, lo=0.0),
            absolute=absolute,
            relative=relative,
            state_on=state_on,
            state_off=state_off,
            state_query=state_query,
        )
    return specs


def _data_formats(node: _Node) -> tuple[tuple[DataFormat, ...], Template | None, ByteOrders | None]:
    node.mapping(
        ("formats", "format_query", "byte_order", "layout", "trace_query", "traces", "frequency"),
        required=("formats", "layout", "trace_query", "traces"),
    )
    entries = node["formats"].elements()
    if not entries:
        node["formats"].fail("must list at least one data format")
    format_query = node["format_query"].optional_template(query=True)
    formats: list[DataFormat] = []
    for entry in entries:
        entry.mapping(("encoding", "set", "reply"), required=("encoding",))
        encoding = entry["encoding"].text(choices=ENCODINGS)
        if any(f.encoding == encoding for f in formats):
            entry["encoding"].fail(f"'{encoding}' is listed twice")
        set_cmd = entry["set"].optional_template(query=False)
        if len(entries) > 1 and set_cmd is None:
            entry["set"].fail("is required when the dialect lists more than one format")
        reply = entry["reply"].token("reply") if entry["reply"].present else None
        if set_cmd is not None and format_query is not None and reply is None:
            entry["reply"].fail("is required when data.format_query is given")
        formats.append(DataFormat(encoding, set_cmd, reply))
    order = node["byte_order"]
    binary = any(f.binary for f in formats)
    if binary and not order.present:
        order.fail("is required when a binary format (real32, real64) is listed")
    return tuple(formats), format_query, _byte_orders(order) if order.present else None


def _byte_orders(node: _Node) -> ByteOrders:
    node.mapping(("fixed", "preferred", "query", "big", "little"))
    if node["fixed"].present:
        if any(node[k].present for k in ("preferred", "query", "big", "little")):
            node.fail(
                "give either 'fixed' or the selectable orders (preferred, query, big, little)"
            )
        return ByteOrders(node["fixed"].text(choices=BYTE_ORDERS), fixed=True)
    node.mapping(("preferred", "query", "big", "little"), required=("preferred", "big", "little"))
    query = node["query"].optional_template(query=True)
    parts: dict[str, Any] = {}
    for order in BYTE_ORDERS:
        sub = node[order].mapping(("set", "reply"), required=("set",))
        parts[f"set_{order}"] = sub["set"].template(query=False)
        reply = sub["reply"].token("reply") if sub["reply"].present else None
        if query is not None and reply is None:
            sub["reply"].fail("is required when byte_order.query is given")
        parts[f"reply_{order}"] = reply
    return ByteOrders(
        node["preferred"].text(choices=BYTE_ORDERS), fixed=False, query=query, **parts
    )


def _traces(node: _Node) -> dict[str, str]:
    node.mapping(S_PARAMETERS)
    if not node.value:
        node.fail(f"must map at least one of {', '.join(S_PARAMETERS)} to a trace token")
    return {name: node[name].token("trace token") for name in S_PARAMETERS if node[name].present}


def _frequency(node: _Node) -> tuple[Template | None, float]:
    if not node.present:
        return None, 1.0
    node.mapping(("query", "unit_scale"), required=("query",))
    return node["query"].template(query=True), node["unit_scale"].number(1.0, positive=True, lo=0.0)


def _switch(node: _Node) -> SwitchSpec:
    node.mapping(("set", "query", "reply", "standards"), required=("set", "standards"))
    query = node["query"].optional_template(("standard",), query=True)
    reply = node["reply"].text(
        "flag" if query is not None and "standard" in query.fields else "token",
        choices=SWITCH_REPLIES,
    )
    if query is not None and reply == "flag" and "standard" not in query.fields:
        node["query"].fail(
            "a 'flag' query must use {standard} (it asks whether that one is selected)"
        )
    standards = node["standards"].mapping(STANDARDS)
    if not standards.value:
        standards.fail(f"must map at least one of {', '.join(STANDARDS)} to a token")
    tokens = {
        name: standards[name].token("standard token")
        for name in STANDARDS
        if standards[name].present
    }
    return SwitchSpec(
        set=node["set"].template(("standard",), query=False, require=("standard",)),
        query=query,
        reply=reply,
        tokens=tokens,
    )


def _show(value: Any) -> str:
    if value is _MISSING:
        return "nothing"
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."
