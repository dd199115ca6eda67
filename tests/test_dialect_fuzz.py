"""Property tests: any value at any new dialect key, and any reply text, gives a result or
one clear line, never a traceback, a hang or a multi-line message (issue: hostile files
and instruments). A longer run is behind --long."""

from __future__ import annotations

import copy
from pathlib import Path

import pytest
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from drivers.dialect import DIALECT_DIR
from drivers.dialect_model import PollSpec
from drivers.dialect_parse import parse_dialect
from drivers.errors import DialectError, ReplyError
from drivers.replies import format_entries, parse_identity, parse_quantity
from drivers.templates import Template
from drivers.trace_reader import poll_done

SLOTTED = yaml.safe_load((DIALECT_DIR / "slotted-blocks.yaml").read_text())
NEW_KEYS = [
    ("measurement",), ("measurement", "tokens"), ("measurement", "tokens", "S11"),
    ("measurement", "tokens", "S11", "number"), ("measurement", "define"),
    ("measurement", "select"), ("measurement", "cleanup"), ("trigger", "poll"),
    ("trigger", "poll", "done_reply"), ("trigger", "poll", "interval"),
    ("trigger", "sweep_time_unit_scale"), ("data", "frequency"),
    ("data", "frequency", "encoding"), ("data", "frequency", "unit_scale"), ("quirks",),
    ("quirks", "delays"), ("quirks", "read_request"), ("session", "identity_reply"),
    ("session", "identity_reply", "fields"), ("session", "identity_reply", "separator"),
    ("data", "trace_query"), ("settings", "start", "read_scale"),
]
SCALARS = (st.none() | st.booleans() | st.integers() | st.integers(min_value=10**300)
           | st.floats() | st.text(max_size=40))
VALUES = st.recursive(SCALARS, lambda inner: st.lists(inner, max_size=4)
                      | st.dictionaries(st.text(max_size=12), inner, max_size=4), max_leaves=12)
LONG = settings(max_examples=2000, deadline=None,
                suppress_health_check=[HealthCheck.too_slow])
SHORT = settings(max_examples=150, deadline=None,
                 suppress_health_check=[HealthCheck.too_slow])


def _with(doc: dict, path: tuple[str, ...], value: object) -> dict:
    out = copy.deepcopy(doc)
    node = out
    for key in path[:-1]:
        if not isinstance(node.get(key), dict):
            node[key] = {}
        node = node[key]
    node[path[-1]] = value
    return out


def _check_dialect(path: tuple[str, ...], value: object) -> None:
    try:
        parse_dialect(_with(SLOTTED, path, value), Path("fuzz.yaml"))
    except DialectError as exc:
        message = str(exc)
        assert "\n" not in message and len(message) < 600, message
        assert message.startswith("dialect fuzz.yaml: ")


def _check_replies(reply: str, separator: str) -> None:
    for integer in (False, True):
        try:
            parse_quantity(reply, "instrument X: 'Q?'", integer=integer)
        except ReplyError as exc:
            assert "\n" not in str(exc)
    try:
        parse_identity(reply, "instrument X: 'ID?'", separator or ",", ("model", "skip"))
    except ReplyError as exc:
        assert "\n" not in str(exc)
    spec = PollSpec(Template.parse("*ESR?"), None, 0, None, 0.01)
    try:
        assert poll_done(spec, reply, "instrument X: '*ESR?'") in (True, False)
    except ReplyError as exc:
        assert "\n" not in str(exc)


@SHORT
@given(st.sampled_from(NEW_KEYS), VALUES)
def test_any_value_at_a_new_key_is_loaded_or_one_line(path, value) -> None:
    _check_dialect(path, value)


@SHORT
@given(st.text(max_size=80), st.text(max_size=3))
def test_any_reply_is_parsed_or_one_line(reply: str, separator: str) -> None:
    _check_replies(reply, separator)


@SHORT
@given(st.lists(st.tuples(st.integers(-32768, 32767), st.text(max_size=3000)), max_size=200))
def test_error_entries_stay_one_bounded_line(entries) -> None:
    text = format_entries(entries)
    assert "\n" not in text and len(text) <= 5 * (80 + 12) + 20


@pytest.mark.long
@LONG
@given(st.sampled_from(NEW_KEYS), VALUES, st.text(max_size=200), st.text(max_size=3))
def test_long_fuzz_of_new_keys_and_replies(path, value, reply: str, separator: str) -> None:
    _check_dialect(path, value)
    _check_replies(reply, separator)


@pytest.mark.parametrize(("path", "value"), [
    (("measurement", "tokens", "S11", "number"), [10**300] * 50),  # found by the long fuzz
    (("trigger", "poll", "done_reply"), {"k" * 50: ["v" * 500] * 20}),
    (("measurement", "select"), "SLOT:SEL {" + "x" * 3000),  # a long bad template
    (("quirks", "read_request"), "R" * 3000 + "\x07"),
])
def test_huge_values_are_shown_bounded(path: tuple[str, ...], value: object) -> None:
    with pytest.raises(DialectError) as info:
        parse_dialect(_with(SLOTTED, path, value), Path("fuzz.yaml"))
    assert len(str(info.value)) < 300, str(info.value)
