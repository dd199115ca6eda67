"""Dialect sections for instruments unlike the SCPI-1999 generic forms.

Measurement define/select, completion by polling, a frequency axis from queries, identity
replies in another shape, and field quirks. Each check names the file and key path.
"""

from __future__ import annotations

from drivers.blocks import BYTE_ORDERS, ENCODINGS
from drivers.dialect_model import (
    IDENTITY_FIELDS,
    FrequencyAxis,
    IdentitySpec,
    MeasurementSpec,
    PollSpec,
    Quirks,
)
from drivers.dialect_node import Node
from drivers.layouts import FREQ_PREFIX
from drivers.templates import Template, TemplateProblem
from drivers.yamlnode import show

MAX_DELAY_S = 30.0
MAX_POLL_INTERVAL_S = 5.0


def measurement(node: Node, traces: dict[str, str],
                switch_terms: dict[str, str] | None = None) -> MeasurementSpec | None:
    """``measurement:``: tokens per trace (and per switch term, under its reading name
    ``switch.forward`` / ``switch.reverse``), define / select / cleanup commands."""
    if not node.present:
        return None
    node.mapping(("tokens", "define", "select", "cleanup"), required=("tokens",))
    tokens = _measurement_tokens(node["tokens"], traces, switch_terms or {})
    fields = ("trace", *next(iter(tokens.values())).keys())

    def commands(key: str) -> tuple[Template, ...]:
        entry = node[key]
        return entry.templates(fields, query=False) if entry.present else ()

    define, select, cleanup = commands("define"), commands("select"), commands("cleanup")
    if not (define or select):
        node.fail("needs 'define' or 'select' (or both)")
    return MeasurementSpec(define, select, cleanup, tokens)


def _measurement_tokens(node: Node, traces: dict[str, str], switch_terms: dict[str, str]
                        ) -> dict[str, dict[str, str]]:
    node.mapping((*traces, *switch_terms))
    for where, names in (("trace in data.traces", traces),
                         ("switch term in data.switch_terms", switch_terms)):
        missing = [name for name in names if not node[name].present]
        if missing:
            node.fail(f"needs tokens for every {where}; missing {', '.join(missing)}")
    tokens: dict[str, dict[str, str]] = {}
    names: tuple[str, ...] | None = None
    for trace in (*traces, *switch_terms):
        entry = node[trace]
        if not isinstance(entry.value, dict) or not entry.value:
            entry.fail("must map token names to tokens, e.g. {number: 1}")
        keys = tuple(sorted(str(k) for k in entry.value))
        if names is not None and keys != names:
            entry.fail(f"must name the same tokens as the others ({', '.join(names)})")
        names = keys
        tokens[trace] = {key: token(entry[key]) for key in keys}
        for key in keys:
            if key == "trace" or not key.isidentifier():
                entry[key].fail("token name must be a word other than 'trace'")
    return tokens


def token(node: Node) -> str:
    """A token; whole numbers are accepted and written as digits (``1`` -> ``"1"``)."""
    value = node.value
    if isinstance(value, int) and not isinstance(value, bool):
        if not 0 <= value <= 10**6:
            node.fail(f"must be a whole number from 0 to 1000000, got {value}")
        return str(value)
    return node.token()


def trace_query(node: Node, traces: dict[str, str], spec: MeasurementSpec | None,
                switch_terms: int = 0) -> Template:
    """``data.trace_query``: names the trace unless one trace or a select makes it plain
    (``switch_terms``: how many switch-term traces ``data.switch_terms`` adds)."""
    names = tuple(next(iter(spec.tokens.values())).keys()) if spec else ()
    template = node.template(("trace", *names), query=True)
    count = len(traces) + switch_terms
    if template.fields or count == 1 or (spec is not None and spec.select):
        return template
    where = "data.traces and data.switch_terms list" if switch_terms else "data.traces lists"
    node.fail(
        f"template must use {{trace}} (or a measurement token) when {where} "
        f"{count} traces and no measurement.select is given, got {show(template.text)}"
    )


def poll(node: Node) -> PollSpec:
    """``trigger.poll``: the query and what says done."""
    node.mapping(("query", "arm", "done_bit", "done_when", "done_reply", "interval"),
                 required=("query",))
    has_bit, has_reply = node["done_bit"].present, node["done_reply"].present
    if has_bit == has_reply:
        node.fail("give exactly one of done_bit (a status bit number) or done_reply")
    if node["done_when"].present and not has_bit:
        node["done_when"].fail("applies to done_bit only")
    return PollSpec(
        query=node["query"].template(query=True),
        arm=node["arm"].optional_template(query=False),
        done_bit=node["done_bit"].integer(lo=0, hi=15) if has_bit else None,
        done_reply=token(node["done_reply"]) if has_reply else None,
        interval_s=_bounded(node["interval"], 0.02, 0.001, MAX_POLL_INTERVAL_S),
        done_when_set=node["done_when"].text("set", choices=("set", "clear")) == "set",
    )


def frequency(node: Node, layout: str) -> FrequencyAxis | None:
    """``data.frequency``: a list query (ASCII or binary), start/stop/points queries, or
    (with a ``freq_`` layout) the frequencies sent inside each trace."""
    in_trace = layout.startswith(FREQ_PREFIX)
    if not node.present:
        return FrequencyAxis("trace", 1.0) if in_trace else None
    keys = ("query", "encoding", "byte_order", "start", "stop", "points", "unit_scale")
    node.mapping(keys)
    scale = node["unit_scale"].number(1.0, positive=True, lo=0.0)
    edges = [node[k].present for k in ("start", "stop", "points")]
    if in_trace:
        if node["query"].present or any(edges):
            node.fail(f"layout {layout} sends the frequencies with each trace: give only "
                      "unit_scale here")
        return FrequencyAxis("trace", scale)
    if node["query"].present:
        if any(edges):
            node.fail("give either 'query' (a list) or 'start', 'stop' and 'points', not both")
        encoding = node["encoding"].text("ascii", choices=ENCODINGS)
        if encoding != "ascii" and not node["byte_order"].present:
            node["byte_order"].fail(f"is required with encoding {encoding}")
        if encoding == "ascii" and node["byte_order"].present:
            node["byte_order"].fail("applies to binary encodings only")
        return FrequencyAxis(
            "list",
            scale,
            query=node["query"].template(query=True),
            encoding=encoding,
            byte_order=node["byte_order"].text("big", choices=BYTE_ORDERS),
        )
    if not all(edges):
        node.fail("needs 'query', or all of 'start', 'stop' and 'points'")
    for key in ("encoding", "byte_order"):
        if node[key].present:
            node[key].fail("applies to a 'query' list only")
    return FrequencyAxis(
        "edges",
        scale,
        start=node["start"].template(query=True),
        stop=node["stop"].template(query=True),
        points=node["points"].template(query=True),
    )


def quirks(node: Node) -> Quirks:
    """``quirks:``: habits of the instrument's replies and timing."""
    if not node.present:
        return Quirks()
    node.mapping(("unquote_replies", "strip_padding", "unit_suffixes", "read_request", "delays"))
    delays = []
    if node["delays"].present:
        for entry in node["delays"].elements():
            entry.mapping(("after", "seconds"), required=("after", "seconds"))
            after = entry["after"].text()
            try:
                Template.parse(after)
            except TemplateProblem as exc:
                entry["after"].fail(str(exc))
            delays.append((after.upper(), _bounded(entry["seconds"], None, 0.0, MAX_DELAY_S)))
    return Quirks(
        unquote=node["unquote_replies"].boolean(False),
        strip_padding=node["strip_padding"].boolean(False),
        unit_suffixes=node["unit_suffixes"].boolean(False),
        read_request=_any_template(node["read_request"]),
        delays=tuple(delays),
    )


def identity_reply(node: Node) -> IdentitySpec:
    """``session.identity_reply``: separator and the order of the identity fields."""
    if not node.present:
        return IdentitySpec()
    node.mapping(("separator", "fields"), required=("fields",))
    separator = node["separator"].text(",")
    if len(separator) > 4 or not separator.isprintable():  # only splits replies, never sent
        node["separator"].fail(f"must be 1 to 4 printable characters, got {show(separator)}")
    fields = tuple(entry.text(choices=IDENTITY_FIELDS) for entry in node["fields"].elements())
    named = [f for f in fields if f != "skip"]
    if len(set(named)) != len(named):
        node["fields"].fail("names a field twice")
    if "model" not in named:
        node["fields"].fail("must include model")
    return IdentitySpec(separator, fields)


def _any_template(node: Node) -> Template | None:
    """A command or a query (whichever the text is), or None when absent."""
    if not node.present:
        return None
    return node.template(query="?" in str(node.value))


def _bounded(node: Node, default: float | None, lo: float, hi: float) -> float:
    value = node.number(default, lo=lo) if default is not None else node.number(lo=lo)
    if value > hi:
        node.fail(f"must be at most {hi:g} s, got {value!r}")
    return float(value)
