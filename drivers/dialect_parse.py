"""Reading and validating dialect files; every problem is one line naming file and key.

    dialect configs/dialects/x.yaml: settings.start.set: template may only use {value}, found {cmd}

The schema is documented in configs/dialects/README.md; keep the two in step.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from drivers import dialect_features as features
from drivers.blocks import BYTE_ORDERS, ENCODINGS
from drivers.dialect_model import (
    REQUIRED_SETTINGS,
    SETTING_NAMES,
    STANDARDS,
    SWITCH_REPLIES,
    SWITCH_TERMS,
    WAIT_MODES,
    ByteOrders,
    DataFormat,
    Dialect,
    SettingSpec,
    SwitchSpec,
    shown_path,
)
from drivers.dialect_node import Node
from drivers.errors import DialectError
from drivers.layouts import LAYOUTS
from drivers.stimulus import S_PARAMETERS
from drivers.templates import Template
from drivers.yamltext import load_yaml_file

FIXABLE_SETTINGS = ("power", "if_bandwidth")
SWITCH_TERM_KEYS = ("forward", "reverse")  # data.switch_terms keys, in SWITCH_TERMS order
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
    "measurement",
    "quirks",
)


def parse_dialect_file(path: Path) -> Dialect:
    """Load ``path`` with ``yaml.safe_load`` and validate it into a ``Dialect``."""
    raw = load_yaml_file(path, f"dialect {shown_path(path)}", DialectError)
    return parse_dialect(raw, path)


def parse_dialect(raw: Any, path: Path) -> Dialect:
    """Validate an already loaded YAML document (``path`` is used in messages)."""
    root = Node(raw, f"dialect {shown_path(path)}")
    root.mapping(TOP_KEYS, required=("dialect", "session", "settings", "data", "trigger", "errors"))
    name = root["dialect"].token("dialect name")
    session = root["session"].mapping(
        ("identity", "identity_reply", "clear", "opening", "opc_query", "opc_after_setting"),
        required=("identity",),
    )
    opening = session["opening"]
    trigger = _trigger(root["trigger"])
    opc_after_setting = session["opc_after_setting"].boolean(False)
    if (trigger["wait"] == "opc" or opc_after_setting) and not session["opc_query"].present:
        why = "opc_after_setting is true" if opc_after_setting else "trigger.wait is 'opc'"
        session["opc_query"].fail(f"is required when {why}")
    formats, format_query, byte_orders = _data_formats(root["data"])
    data = root["data"]
    traces = _traces(data["traces"])
    switch_terms = _switch_terms(data["switch_terms"], traces)
    measurement = features.measurement(root["measurement"], traces, switch_terms)
    errors = root["errors"].mapping(("query", "none_code", "max_entries"), required=("query",))
    return Dialect(
        name=name,
        path=path,
        description=root["description"].text(""),
        **_terminators(root["terminators"]),
        identity=session["identity"].template(query=True),
        clear=session["clear"].optional_template(query=False),
        opening=opening.templates(query=False) if opening.present and opening.value != [] else (),
        opc_query=session["opc_query"].optional_template(query=True),
        opc_after_setting=opc_after_setting,
        settings=_settings(root["settings"]),
        formats=formats,
        format_query=format_query,
        byte_orders=byte_orders,
        layout=(layout := data["layout"].text(choices=LAYOUTS)),
        trace_query=features.trace_query(data["trace_query"], traces, measurement,
                                         len(switch_terms)),
        traces=traces,
        switch_terms=switch_terms,
        frequency=features.frequency(data["frequency"], layout),
        **trigger,
        error_query=errors["query"].template(query=True),
        error_none_code=errors["none_code"].integer(0, lo=-32768, hi=32767),
        error_max_entries=errors["max_entries"].integer(64, lo=1, hi=10_000),
        switch=_switch(root["switch"]) if root["switch"].present else None,
        measurement=measurement,
        quirks=features.quirks(root["quirks"]),
        identity_reply=features.identity_reply(session["identity_reply"]),
    )


def _terminators(node: Node) -> dict[str, str]:
    if not node.present:
        return {"write_termination": "\n", "read_termination": "\n"}
    node.mapping(("write", "read"))
    return {
        "write_termination": node["write"].text("\n", choices=TERMINATORS),
        "read_termination": node["read"].text("\n", choices=TERMINATORS),
    }


def _trigger(node: Node) -> dict[str, Any]:
    node.mapping(
        ("command", "wait", "wai", "poll", "sweep_time_query", "sweep_time_unit_scale"),
        required=("command", "wait"),
    )
    wait = node["wait"].text(choices=WAIT_MODES)
    if wait == "wai" and not node["wai"].present:
        node["wai"].fail("is required when wait is 'wai'")
    if wait == "poll" and not node["poll"].present:
        node["poll"].fail("is required when wait is 'poll'")
    if wait != "poll" and node["poll"].present:
        node["poll"].fail("applies only when wait is 'poll'")
    return {
        "trigger": node["command"].template(query=False),
        "wait": wait,
        "wai": node["wai"].optional_template(query=False),
        "poll": features.poll(node["poll"]) if wait == "poll" else None,
        "sweep_time_query": node["sweep_time_query"].optional_template(query=True),
        "sweep_time_scale": node["sweep_time_unit_scale"].number(1.0, positive=True, lo=0.0),
    }


def _settings(node: Node) -> dict[str, SettingSpec]:
    node.mapping(SETTING_NAMES, required=REQUIRED_SETTINGS)
    specs = {}
    for name in SETTING_NAMES:
        entry = node[name]
        if not entry.present:
            continue
        if isinstance(entry.value, dict) and "fixed" in entry.value:
            specs[name] = _fixed_setting(entry, name)
            continue
        keys = ("set", "query", "type", "unit_scale", "read_scale", "tolerance")
        if name == "averaging":
            keys += ("state",)
        entry.mapping(keys, required=("set", "query", "type"))
        kind = entry["type"].text(choices=("integer", "real"))
        if name == "points" and kind != "integer":
            entry["type"].fail("must be 'integer' for points")
        for key in ("unit_scale", "read_scale"):
            if kind == "integer" and entry[key].present:
                entry[key].fail("applies to real settings only")
        fields = ("value", "state") if name == "averaging" else ("value",)
        sets = entry["set"].templates(fields, query=False)
        if not any("value" in t.fields for t in sets):
            entry["set"].fail("at least one command must use {value}")
        absolute, relative = _tolerance(entry["tolerance"])
        state_on = state_off = None
        state_query = None
        uses_state = any("state" in t.fields for t in sets)
        state = entry["state"] if name == "averaging" else Node(None, node.source)
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
            scale=(scale := entry["unit_scale"].number(1.0, positive=True, lo=0.0)),
            read_scale=entry["read_scale"].number(scale, positive=True, lo=0.0),
            absolute=absolute,
            relative=relative,
            state_on=state_on,
            state_off=state_off,
            state_query=state_query,
        )
    return specs


def _tolerance(node: Node) -> tuple[float, float]:
    if not node.present:
        return 0.0, 0.0
    node.mapping(("absolute", "relative"))
    return node["absolute"].number(0.0, lo=0.0), node["relative"].number(0.0, lo=0.0)


def _fixed_setting(entry: Node, name: str) -> SettingSpec:
    """``{fixed: <SI value>, tolerance: ...}``: an instrument that cannot change it."""
    if name not in FIXABLE_SETTINGS:
        entry["fixed"].fail(f"only {' and '.join(FIXABLE_SETTINGS)} may be fixed")
    entry.mapping(("fixed", "tolerance"))
    low, high = (-200.0, 100.0) if name == "power" else (1e-3, 1e9)
    absolute, relative = _tolerance(entry["tolerance"])
    return SettingSpec(name=name, set=(), query=None, integer=False, absolute=absolute,
                       relative=relative, fixed=entry["fixed"].number(lo=low, hi=high))


def _data_formats(node: Node) -> tuple[tuple[DataFormat, ...], Template | None, ByteOrders | None]:
    node.mapping(
        ("formats", "format_query", "byte_order", "layout", "trace_query", "traces", "frequency",
         "switch_terms"),
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


def _byte_orders(node: Node) -> ByteOrders:
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


def _traces(node: Node) -> dict[str, str]:
    node.mapping(S_PARAMETERS)
    if not node.value:
        node.fail(f"must map at least one of {', '.join(S_PARAMETERS)} to a trace token")
    return {name: node[name].token("trace token") for name in S_PARAMETERS if node[name].present}


def _switch_terms(node: Node, traces: dict[str, str]) -> dict[str, str]:
    """``data.switch_terms``: the trace tokens of the two switch terms (optional)."""
    if not node.present:
        return {}
    node.mapping(SWITCH_TERM_KEYS, required=SWITCH_TERM_KEYS)
    if set(traces) != set(S_PARAMETERS):
        node.fail("needs data.traces to list all of S11, S21, S12, S22 (switch terms belong "
                  "to an analyzer that drives each port in turn)")
    terms: dict[str, str] = {}
    seen = {token.upper(): f"data.traces.{name}" for name, token in traces.items()}
    for key, name in zip(SWITCH_TERM_KEYS, SWITCH_TERMS, strict=True):
        token = node[key].token("trace token")
        if token.upper() in seen:
            node[key].fail(f"trace token {token!r} is already the token of {seen[token.upper()]}")
        seen[token.upper()] = f"data.switch_terms.{key}"
        terms[name] = token
    return terms


def _switch(node: Node) -> SwitchSpec:
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
