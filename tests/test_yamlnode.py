"""The one validating YAML node (drivers/yamlnode.py) shared by every config reader."""

from __future__ import annotations

import math

import pytest

from acquire.errors import ConfigError
from acquire.yamlfile import Node
from drivers.errors import DialectError
from drivers.yamlnode import YamlNode, one_line, show


def node(value, error=DialectError) -> YamlNode:
    return YamlNode({"x": value}, "dialect d.yaml", error=error)["x"]


def test_error_class_is_the_callers() -> None:
    with pytest.raises(DialectError, match=r"^dialect d\.yaml: x: is required$"):
        YamlNode({}, "dialect d.yaml", error=DialectError)["x"].require()
    with pytest.raises(ConfigError):
        Node({}, "plan p.yaml")["x"].require()
    assert isinstance(Node({"a": {}}, "p")["a"], Node)  # children keep the subclass


def test_null_counts_as_absent_everywhere() -> None:
    assert node(None).number(3.0) == 3.0
    assert node(None).text("d") == "d"
    with pytest.raises(DialectError, match="x: is required"):
        node(None).integer()
    with pytest.raises(DialectError, match=r"a: is required"):
        YamlNode({"a": None}, "s", error=DialectError).mapping(("a",), required=("a",))


@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf, "nan", ".inf", 10**400,
                                   -(10**400), "1e999"])
def test_non_finite_and_huge_numbers_are_refused(value) -> None:
    # A NaN passes every "<" test, so a range check alone lets it through (IEEE 754).
    with pytest.raises(DialectError, match="x: must be a"):
        node(value).number(lo=0.0, hi=10.0)
    with pytest.raises(DialectError, match="x: must be a"):
        node(value).number()


def test_number_ranges_and_numeric_text() -> None:
    assert node("1e6").number() == 1e6  # YAML 1.1 reads 1e6 as text
    assert node(5).number(lo=0, hi=10) == 5.0
    with pytest.raises(DialectError, match=r"must be from 0 to 10, got 11"):
        node(11).number(lo=0, hi=10)
    with pytest.raises(DialectError, match=r"must be above 0, got 0"):
        node(0).number(positive=True)
    with pytest.raises(DialectError, match=r"must be a smaller number"):
        node(1e301).number()


def test_integer_has_a_range_even_when_none_is_given() -> None:
    with pytest.raises(DialectError, match=r"integer of at most 19 digits, got an integer "
                                            r"of 401 digits"):
        node(10**400).integer()
    with pytest.raises(DialectError, match=r"must be an integer from 1 to 64, got 65"):
        node(65).integer(lo=1, hi=64)
    with pytest.raises(DialectError, match=r"must be an integer, got 1.5"):
        node(1.5).integer()


def test_choices_and_text() -> None:
    assert node("\n").text(choices=("\n", "\r\n")) == "\n"
    with pytest.raises(DialectError, match=r"must be one of a, b, got 'c'"):
        node("c").text(choices=("a", "b"))
    with pytest.raises(DialectError, match="must be a non-empty string"):
        node("  ").text()


def test_messages_are_one_line_and_bounded() -> None:
    with pytest.raises(DialectError) as info:
        YamlNode({"bad\nkey": 1}, "dialect d.yaml", error=DialectError).mapping(("a",))
    assert "\n" not in str(info.value)
    assert one_line("a\nb\x00") == "a\\nb\\x00"
    # A value whose full repr would be astronomically long renders in no time.
    bomb: list = ["lol"]
    for _ in range(40):
        bomb = [bomb] * 10
    text = show(bomb)  # repr() of this would need 10**40 list visits: it never returns
    assert len(text) <= 60
    assert show("x" * 10_000_000).endswith("...")
