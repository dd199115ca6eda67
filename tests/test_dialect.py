"""Dialect files (drivers.dialect, drivers.dialect_parse, drivers.templates).

Each kind of bad dialect gives one line naming the file and the key path. The shipped
dialects are checked against the command forms they must use: IEEE Std 488.2 common
commands and SCPI-1999 generic forms for scpi-generic.
"""

from __future__ import annotations

import copy
from pathlib import Path
from typing import Any

import pytest
import yaml

from drivers.dialect import DIALECT_DIR, dialect_path, load_dialect
from drivers.errors import DialectError, SweepdError
from drivers.templates import Template, TemplateProblem, check_token, format_number

GENERIC = yaml.safe_load((DIALECT_DIR / "scpi-generic.yaml").read_text())
TABLETOP = yaml.safe_load((DIALECT_DIR / "tabletop-ascii.yaml").read_text())


def write(tmp_path: Path, doc: Any, name: str = "x.yaml") -> Path:
    path = tmp_path / name
    path.write_text(yaml.safe_dump(doc) if not isinstance(doc, str) else doc)
    return path


def mutated(base: dict, key: str, value: Any) -> dict:
    """A copy of ``base`` with ``key`` (dotted path, ``[i]`` for lists) set or deleted."""
    doc = copy.deepcopy(base)
    parts = key.replace("[", ".[").split(".")
    node: Any = doc
    for part in parts[:-1]:
        node = node[int(part[1:-1])] if part.startswith("[") else node[part]
    last = parts[-1]
    index: Any = int(last[1:-1]) if last.startswith("[") else last
    if value is DELETE:
        del node[index]
    else:
        node[index] = value
    return doc


DELETE = object()


def load_error(tmp_path: Path, doc: Any) -> str:
    path = write(tmp_path, doc)
    with pytest.raises(DialectError) as info:
        load_dialect(path)
    message = str(info.value)
    assert "\n" not in message
    assert message.startswith(f"dialect {path}: ") or message.startswith("dialect x.yaml: ")
    return message


# -- the shipped dialects ----------------------------------------------------------------
def test_generic_dialect_loads_with_binary_first() -> None:
    d = load_dialect("scpi-generic")
    assert d.name == "scpi-generic"
    assert str(d.path).endswith("configs/dialects/scpi-generic.yaml")
    assert [f.encoding for f in d.formats] == ["real64", "real32", "ascii"]
    assert d.byte_orders is not None and d.byte_orders.preferred == "little"
    assert d.wait == "wai" and d.layout == "re_im"
    assert d.traces == {"S11": "S11", "S21": "S21", "S12": "S12", "S22": "S22"}
    assert d.identity.text == "*IDN?" and d.clear is not None and d.clear.text == "*CLS"
    assert d.switch is not None and d.switch.tokens["device"] == "(@5)"
    assert set(d.settings) == {"start", "stop", "points", "power", "if_bandwidth", "averaging"}


def test_generic_dialect_uses_only_generic_forms() -> None:
    # Every command is an IEEE 488.2 common command or a SCPI-1999 generic subsystem.
    d = load_dialect("scpi-generic")
    texts = [
        d.identity.text,
        d.opc_query.text,
        d.trigger.text,
        d.trace_query.text,
        d.error_query.text,
    ]
    texts += [t.text for t in d.opening]
    for spec in d.settings.values():
        texts += [t.text for t in spec.set] + [spec.query.text]
    texts += [f.set.text for f in d.formats if f.set is not None]
    subsystems = ("*", ":SENS:", ":SOUR:", ":INIT", ":TRIG:", ":FORM", ":TRAC:", ":SYST:", ":ROUT:")
    for text in texts:
        assert text.startswith(subsystems), text


def test_tabletop_dialect_loads() -> None:
    d = load_dialect("tabletop-ascii")
    assert d.read_termination == "\r\n" and d.write_termination == "\n"
    assert d.opc_after_setting is True
    assert [f.encoding for f in d.formats] == ["ascii"] and d.byte_orders is None
    assert d.layout == "db_deg" and d.wait == "opc"
    axis = d.frequency
    assert d.settings["start"].scale == 1e6 and axis is not None and axis.scale == 1e6
    assert axis.kind == "list" and axis.query is not None and axis.query.text == "MEASure:AXIS?"
    assert d.switch is not None and d.switch.reply == "token"


def test_bare_name_and_path_resolution(tmp_path: Path) -> None:
    assert dialect_path("scpi-generic") == DIALECT_DIR / "scpi-generic.yaml"
    assert load_dialect(DIALECT_DIR / "tabletop-ascii.yaml").name == "tabletop-ascii"
    with pytest.raises(
        DialectError,
        match=r"no dialect named 'nope' \(shipped: scpi-generic, slotted-blocks, tabletop-ascii",
    ):
        load_dialect("nope")
    with pytest.raises(DialectError, match=r"missing.yaml: file not found"):
        load_dialect(tmp_path / "missing.yaml")
    assert issubclass(DialectError, SweepdError)


def test_message_names_path_relative_to_working_folder(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.chdir(tmp_path)
    write(tmp_path, mutated(GENERIC, "settings.start.set", ":SENS:FREQ:STAR {cmd}"))
    with pytest.raises(DialectError) as info:
        load_dialect(tmp_path / "x.yaml")
    assert str(info.value) == (
        "dialect x.yaml: settings.start.set: template may only use {value}, found {cmd}"
    )


# -- each kind of bad dialect -----------------------------------------------------------
BAD = [
    (
        "settings.start.set",
        ":SENS:FREQ:STAR {cmd}",
        "settings.start.set: template may only use {value}, found {cmd}",
    ),
    (
        "settings.start.set",
        ":SENS:FREQ:STAR {value}\n*RST",
        "settings.start.set: template ':SENS:FREQ:STAR {value}\\n*RST' contains a newline",
    ),
    ("settings.start.set", ":SENS:FREQ:STAR {value!r}", "may not carry a format or conversion"),
    ("settings.start.set", ":SENS:FREQ:STAR {value:.3f}", "may not carry a format or conversion"),
    ("settings.start.set", ":SENS:FREQ:STAR {value", "settings.start.set: unbalanced braces"),
    ("settings.start.set", ":SENS:FREQ:STAR {{x}} {value}", "literal braces are not allowed"),
    (
        "settings.start.set",
        ":SENS:FREQ:STAR? {value}",
        "settings.start.set: a command template must not contain '?'",
    ),
    (
        "settings.start.set",
        ":SENS:FREQ:STAR 1E9",
        "settings.start.set: at least one command must use {value}",
    ),
    (
        "settings.start.query",
        ":SENS:FREQ:STAR",
        "settings.start.query: a query template must contain '?'",
    ),
    (
        "settings.start.type",
        "float",
        "settings.start.type: must be one of integer, real, got 'float'",
    ),
    ("settings.points.type", "real", "settings.points.type: must be 'integer' for points"),
    ("settings.start.unit_scale", 0, "settings.start.unit_scale: must be above 0"),
    ("settings.points.unit_scale", 10, "settings.points.unit_scale: applies to real settings only"),
    (
        "settings.start.tolerance",
        {"absolute": -1},
        "settings.start.tolerance.absolute: must be at least 0",
    ),
    ("settings.start.speed", 3, "settings.start: unknown key 'speed'"),
    ("settings.stop", DELETE, "settings.stop: is required"),
    (
        "settings.averaging.state",
        DELETE,
        "settings.averaging.state: is required when a set command uses {state}",
    ),
    ("settings.colour", {"set": "X {value}"}, "settings: unknown key 'colour'"),
    (
        "data.traces.S21",
        "S21;*RST",
        "data.traces.S21: trace token 'S21;*RST' may not contain a bare ';'",
    ),
    ("data.traces.S21", "S21\n", "data.traces.S21: trace token 'S21\\n' contains a newline"),
    ("data.traces.S21", "", "data.traces.S21: trace token must be a non-empty string"),
    ("data.traces.S33", "S33", "data.traces: unknown key 'S33'"),
    ("data.trace_query", ":TRAC:DATA?",
     "data.trace_query: template must use {trace} (or a measurement token) when data.traces "
     "lists 4 traces"),
    (
        "data.trace_query",
        ":TRAC:DATA? {param}",
        "data.trace_query: template may only use {trace}, found {param}",
    ),
    ("data.layout", "polar", "data.layout: must be one of re_im, db_deg, lin_deg, freq_re_im, "
     "freq_db_deg, freq_lin_deg, got 'polar'"),
    (
        "data.formats[0].encoding",
        "real16",
        "data.formats[0].encoding: must be one of ascii, real32, real64, got 'real16'",
    ),
    ("data.formats[1].encoding", "real64", "data.formats[1].encoding: 'real64' is listed twice"),
    (
        "data.formats[0].reply",
        DELETE,
        "data.formats[0].reply: is required when data.format_query is given",
    ),
    (
        "data.formats[0].set",
        DELETE,
        "data.formats[0].set: is required when the dialect lists more than one format",
    ),
    ("data.formats", [], "data.formats: must list at least one data format"),
    ("data.byte_order", DELETE, "data.byte_order: is required when a binary format"),
    (
        "data.byte_order.preferred",
        "middle",
        "data.byte_order.preferred: must be one of big, little",
    ),
    ("data.byte_order.big", DELETE, "data.byte_order.big: is required"),
    (
        "data.byte_order.fixed",
        "big",
        "data.byte_order: give either 'fixed' or the selectable orders",
    ),
    ("trigger.wait", "poll", "trigger.poll: is required when wait is 'poll'"),
    ("trigger.wai", DELETE, "trigger.wai: is required when wait is 'wai'"),
    ("trigger.command", DELETE, "trigger.command: is required"),
    (
        "trigger.command",
        ":INIT:IMM;*OPC?",
        "trigger.command: a command template must not contain '?'",
    ),
    ("errors.query", DELETE, "errors.query: is required"),
    ("errors.max_entries", 0, "errors.max_entries: must be an integer from 1 to 10000, got 0"),
    ("session.identity", DELETE, "session.identity: is required"),
    (
        "session.opc_after_setting",
        "yes",
        "session.opc_after_setting: must be true or false, got 'yes'",
    ),
    (
        "session.opening[0]",
        ":INIT:CONT OFF {value}",
        "session.opening[0]: template takes no placeholders, found {value}",
    ),
    ("switch.set", ":ROUT:CLOS (@1)", "switch.set: template must use {standard}"),
    (
        "switch.standards.open",
        "(@1);*RST",
        "switch.standards.open: standard token '(@1);*RST' may not contain a bare ';'",
    ),
    ("switch.standards.fixture", "(@9)", "switch.standards: unknown key 'fixture'"),
    ("switch.reply", "flag", None),  # allowed: the query uses {standard}
    ("switch.query", ":ROUT:CLOS?", "switch.query: a 'flag' query must use {standard}"),
    ("terminators.read", "\t", "terminators.read: must be one of"),
    ("terminators.write", "", "terminators.write: must be one of"),
    ("dialect", DELETE, "dialect: is required"),
    ("colour", "red", "unknown key 'colour'"),
    ("settings", "none", "settings: must be a mapping of keys, got 'none'"),
]


@pytest.mark.parametrize(("key", "value", "words"), BAD, ids=[f"{k}={v!r}"[:50] for k, v, _ in BAD])
def test_bad_dialect(tmp_path: Path, key: str, value: Any, words: str | None) -> None:
    doc = mutated(GENERIC, key, value)
    if words is None:
        load_dialect(write(tmp_path, doc))
        return
    message = load_error(tmp_path, doc)
    assert words in message, message


def test_quoted_semicolon_in_token_is_allowed(tmp_path: Path) -> None:
    doc = mutated(GENERIC, "data.traces.S21", "'S21;B'")
    assert load_dialect(write(tmp_path, doc)).traces["S21"] == "'S21;B'"


def test_not_yaml_and_not_a_mapping(tmp_path: Path) -> None:
    message = load_error(tmp_path, "dialect: [unclosed\n")
    assert "YAML syntax error" in message and "line " in message
    message = load_error(tmp_path, "- a list\n")
    assert message.endswith("must be a mapping of keys, got ['a list']")
    (tmp_path / "bin.yaml").write_bytes(b"\xff\xfe")
    with pytest.raises(DialectError, match="not UTF-8 text"):
        load_dialect(tmp_path / "bin.yaml")


def test_tabletop_variants(tmp_path: Path) -> None:
    # One ASCII format with no command is fine; averaging without a state table too.
    doc = mutated(TABLETOP, "settings.averaging", DELETE)
    assert "averaging" not in load_dialect(write(tmp_path, doc)).settings
    doc = mutated(TABLETOP, "data.frequency.query", "MEASure:AXIS")
    assert "data.frequency.query: a query template must contain '?'" in load_error(tmp_path, doc)
    doc = mutated(TABLETOP, "data.frequency.unit_scale", "MHz")
    assert "data.frequency.unit_scale: must be a number, got 'MHz'" in load_error(
        tmp_path, doc
    )
    doc = mutated(TABLETOP, "switch.standards", {})
    assert "switch.standards: must map at least one" in load_error(tmp_path, doc)


# -- templates and values --------------------------------------------------------------
def test_template_render_and_fields() -> None:
    t = Template.parse(":SENS:FREQ:STAR {value}", {"value"})
    assert t.fields == {"value"} and not t.is_query
    assert t.render(value="2450000000.0") == ":SENS:FREQ:STAR 2450000000.0"
    assert Template.parse("*IDN?").render() == "*IDN?"
    with pytest.raises(KeyError):
        t.render()
    with pytest.raises(TemplateProblem, match="contains the character"):
        Template.parse(":SENS:FREQ:STAR\x00 {value}", {"value"})


def test_tokens() -> None:
    assert check_token("(@1)") == "(@1)"
    assert check_token('"A;B"') == '"A;B"'
    for bad in ("A;B", "A?", "{x}", "A\r", "", "'open", None, 5):
        with pytest.raises(TemplateProblem):
            check_token(bad)


@pytest.mark.parametrize(
    ("value", "integer", "text"),
    [
        (2.45e9, False, "2450000000.0"),
        (-10, False, "-10.0"),
        (1e-5, False, "1E-05"),
        (1e22, False, "1E+22"),
        (201, True, "201"),
        (201.0, True, "201"),
        (915.0, False, "915.0"),
    ],
)
def test_format_number_is_nrf(value: float, integer: bool, text: str) -> None:
    # <NRf> forms of IEEE Std 488.2 (decimal or exponent); read back exactly.
    assert format_number(value, integer) == text
    assert float(text) == value


def test_format_number_refuses_non_finite_and_fractions() -> None:
    with pytest.raises(ValueError):
        format_number(float("nan"))
    with pytest.raises(ValueError):
        format_number(float("inf"))
    with pytest.raises(ValueError):
        format_number(2.5, integer=True)


def test_readme_example_loads(tmp_path: Path) -> None:
    # The commented example in configs/dialects/README.md stays a valid dialect.
    text = (DIALECT_DIR / "README.md").read_text()
    example = text.split("## A commented example", 1)[1].split("```yaml\n", 1)[1].split("```")[0]
    d = load_dialect(write(tmp_path, example, "bench-ascii.yaml"))
    assert d.name == "bench-ascii" and [f.encoding for f in d.formats] == ["ascii"]
    assert d.byte_orders is None and d.switch is None and set(d.traces) == {"S11", "S21"}
    assert d.settings["averaging"].state_on == "ON"
