"""Dialect keys for instruments unlike the SCPI-1999 generic forms (drivers.dialect_features).

Every new key is loaded from the shipped slotted-blocks dialect, and every kind of bad
value gives one line naming the file and the key path. The placeholders stay validated
tokens: nothing from a plan can reach a command.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest
import yaml
from test_dialect import DELETE, GENERIC, load_error, mutated, write

from drivers.dialect import DIALECT_DIR, load_dialect
from drivers.dialect_model import PollSpec
from drivers.errors import ReplyError
from drivers.templates import Template
from drivers.trace_reader import poll_done

SLOTTED = yaml.safe_load((DIALECT_DIR / "slotted-blocks.yaml").read_text())


def test_the_slotted_dialect_loads_with_every_new_key() -> None:
    d = load_dialect("slotted-blocks")
    assert d.read_termination == "\r\n" and d.identity.text == "UNIT:IDENtity?"
    assert d.identity_reply.separator == "/"
    assert d.identity_reply.fields == ("maker", "model", "serial", "firmware")
    assert d.quirks.unquote and d.quirks.strip_padding and d.quirks.unit_suffixes
    assert d.quirks.delays == (("UNIT:PRES", 0.05),)
    m = d.measurement
    assert m is not None and m.tokens["S21"] == {"number": "2"}
    assert [t.text for t in m.define] == ["SLOT{number}:DEFine {trace}"]
    assert [t.text for t in m.select] == ["SLOT:SELect {number}"]
    assert [t.text for t in m.cleanup] == ["SLOT{number}:DELete"]
    assert d.trace_query.fields == {"number"}
    assert d.wait == "poll" and d.poll is not None
    assert (d.poll.query.text, d.poll.done_reply, d.poll.done_bit) == ("ACQuire:BUSY?", "0", None)
    assert d.poll.interval_s == 0.005 and d.sweep_time_scale == 1e-3
    axis = d.frequency
    assert axis is not None and (axis.kind, axis.encoding, axis.byte_order, axis.scale) == (
        "list", "real64", "big", 1e3)
    assert d.byte_orders is not None and d.byte_orders.fixed and d.byte_orders.preferred == "big"


def test_one_trace_needs_no_trace_placeholder(tmp_path: Path) -> None:
    doc = mutated(GENERIC, "data.traces", {"S11": "S11"})
    doc = mutated(doc, "data.trace_query", ":CALC:DATA?")
    d = load_dialect(write(tmp_path, doc))
    assert d.trace_query.fields == frozenset() and list(d.traces) == ["S11"]


def test_a_select_makes_the_trace_placeholder_unneeded(tmp_path: Path) -> None:
    doc = mutated(SLOTTED, "data.trace_query", "FETCh:SLOT?")
    assert load_dialect(write(tmp_path, doc)).trace_query.text == "FETCh:SLOT?"


def test_a_fixed_setting_has_no_commands(tmp_path: Path) -> None:
    doc = mutated(SLOTTED, "settings.power", {"fixed": -5.0, "tolerance": {"absolute": 0.1}})
    spec = load_dialect(write(tmp_path, doc)).settings["power"]
    assert (spec.fixed, spec.set, spec.query, spec.absolute) == (-5.0, (), None, 0.1)


def test_opc_query_is_needed_only_where_it_is_used(tmp_path: Path) -> None:
    doc = mutated(SLOTTED, "session.opc_query", DELETE)  # wait: poll never asks it
    assert load_dialect(write(tmp_path, doc)).opc_query is None
    doc = mutated(GENERIC, "session.opc_query", DELETE)  # wait: wai
    assert load_dialect(write(tmp_path, doc)).opc_query is None
    doc = mutated(doc, "trigger.wait", "opc")
    assert "session.opc_query: is required when trigger.wait is 'opc'" in load_error(tmp_path,
                                                                                      doc)
    doc = mutated(mutated(GENERIC, "session.opc_query", DELETE),
                  "session.opc_after_setting", True)
    assert "session.opc_query: is required when opc_after_setting is true" in load_error(
        tmp_path, doc)


def test_poll_done_by_reply_or_by_a_bit_set_or_clear() -> None:
    def spec(**kw: object) -> PollSpec:
        base = {"query": Template.parse("*ESR?"), "arm": None, "done_bit": None,
                "done_reply": None, "interval_s": 0.01}
        return PollSpec(**{**base, **kw})

    where = "instrument X: 'Q?'"
    assert poll_done(spec(done_reply="0"), " +0 ", where)
    assert not poll_done(spec(done_reply="0"), "1", where)
    assert poll_done(spec(done_bit=0), "33", where)  # 0b100001: operation complete
    assert not poll_done(spec(done_bit=0), "32", where)
    assert poll_done(spec(done_bit=4, done_when_set=False), "1", where)  # bit 4 clear
    assert not poll_done(spec(done_bit=4, done_when_set=False), "16", where)
    with pytest.raises(ReplyError, match=r"status register 70000 is outside 0\.\.65535"):
        poll_done(spec(done_bit=0), "70000", where)
    with pytest.raises(ReplyError, match="reply is not a number"):
        poll_done(spec(done_bit=0), "busy", where)


def test_an_esr_bit_poll_and_edge_queries_load(tmp_path: Path) -> None:
    doc = mutated(SLOTTED, "trigger.poll", {"query": "*ESR?", "arm": "*OPC", "done_bit": 0})
    doc = mutated(doc, "data.frequency", {"start": "CHAN:FST?", "stop": "CHAN:FSTop?",
                                          "points": "CHAN:NPO?"})
    d = load_dialect(write(tmp_path, doc))
    assert d.poll is not None and d.poll.done_bit == 0 and d.poll.arm is not None
    assert d.frequency is not None and d.frequency.kind == "edges"


BAD: list[tuple[str, Any, str]] = [
    ("measurement.tokens.S21", DELETE,
     "measurement.tokens: needs tokens for every trace in data.traces; missing S21"),
    ("measurement.tokens.S21", {"slot": 2},
     "measurement.tokens.S21: must name the same tokens as the others (number)"),
    ("measurement.tokens.S21", {"number": "2;*RST"},
     "measurement.tokens.S21.number: token '2;*RST' may not contain a bare ';'"),
    ("measurement.tokens.S21", {"number": 10**9},
     "measurement.tokens.S21.number: must be a whole number from 0 to 1000000"),
    ("measurement.tokens.S21", {"number": True},
     "measurement.tokens.S21.number: token must be a non-empty string, got True"),
    ("measurement.tokens.S21", 2, "measurement.tokens.S21: must map token names to tokens"),
    ("measurement.select", "SLOT:SELect {slot}",
     "measurement.select: template may only use {number}, {trace}, found {slot}"),
    ("measurement.define", "SLOT{number}:DEFine? {trace}",
     "measurement.define: a command template must not contain '?'"),
    ("measurement.extra", 1, "measurement: unknown key 'extra'"),
    ("data.trace_query", "FETCh:SLOT? {plan}",
     "data.trace_query: template may only use {number}, {trace}, found {plan}"),
    ("trigger.poll", DELETE, "trigger.poll: is required when wait is 'poll'"),
    ("trigger.poll.done_bit", 0,
     "trigger.poll: give exactly one of done_bit (a status bit number) or done_reply"),
    ("trigger.poll.done_reply", DELETE,
     "trigger.poll: give exactly one of done_bit (a status bit number) or done_reply"),
    ("trigger.poll.interval", 60, "trigger.poll.interval: must be at most 5 s, got 60.0"),
    ("trigger.poll.interval", float("nan"), "trigger.poll.interval: must be a finite number"),
    ("trigger.poll.query", "ACQ:BUSY", "trigger.poll.query: a query template must contain '?'"),
    ("trigger.wait", "opc", "trigger.poll: applies only when wait is 'poll'"),
    ("trigger.sweep_time_unit_scale", 0, "trigger.sweep_time_unit_scale: must be above 0"),
    ("data.frequency.byte_order", DELETE,
     "data.frequency.byte_order: is required with encoding real64"),
    ("data.frequency.encoding", "real16", "data.frequency.encoding: must be one of ascii"),
    ("data.frequency.start", "CHAN:FST?",
     "data.frequency: give either 'query' (a list) or 'start', 'stop' and 'points', not both"),
    ("data.frequency.query", DELETE,
     "data.frequency: needs 'query', or all of 'start', 'stop' and 'points'"),
    ("trigger.poll.done_when", "clear", "trigger.poll.done_when: applies to done_bit only"),
    ("quirks.unit_suffixes", "yes", "quirks.unit_suffixes: must be true or false"),
    ("quirks.delays", [{"after": "UNIT:PRES", "seconds": 31}],
     "quirks.delays[0].seconds: must be at most 30 s, got 31.0"),
    ("quirks.delays", [{"after": "UNIT\nPRES", "seconds": 1}],
     "quirks.delays[0].after: template 'UNIT\\nPRES' contains a newline"),
    ("quirks.delays", [{"seconds": 1}], "quirks.delays[0].after: is required"),
    ("quirks.read_request", "READ {x}", "quirks.read_request: template takes no placeholders"),
    ("quirks.noise", True, "quirks: unknown key 'noise'"),
    ("session.identity_reply.fields", ["maker", "serial"],
     "session.identity_reply.fields: must include model"),
    ("session.identity_reply.fields", ["model", "model"],
     "session.identity_reply.fields: names a field twice"),
    ("session.identity_reply.fields", ["model", "colour"],
     "session.identity_reply.fields[1]: must be one of maker, model, serial, firmware, skip"),
    ("session.identity_reply.separator", " -- ,",
     "session.identity_reply.separator: must be 1 to 4 printable characters, got ' -- ,'"),
    ("settings.start.read_scale", -1e3, "settings.start.read_scale: must be above 0"),
    ("settings.points.read_scale", 10, "settings.points.read_scale: applies to real settings"),
    ("settings.start", {"fixed": 1e9}, "settings.start.fixed: only power and if_bandwidth"),
    ("settings.power", {"fixed": 0.0, "set": "X {value}"}, "settings.power: unknown key 'set'"),
    ("settings.power", {"fixed": float("nan")}, "settings.power.fixed: must be a finite"),
    ("settings.if_bandwidth", {"fixed": 0}, "settings.if_bandwidth.fixed: must be"),
]


@pytest.mark.parametrize(("key", "value", "words"), BAD, ids=[f"{k}={v!r}" for k, v, _ in BAD])
def test_bad_new_keys_name_their_key_path(tmp_path: Path, key: str, value: Any,
                                          words: str) -> None:
    message = load_error(tmp_path, mutated(SLOTTED, key, value))
    assert words in message, message
