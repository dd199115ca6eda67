"""Serial-number patterns run in linear time (issue 10.12).

RE2 guarantees matching in time linear in the input (its documented design, and the
reason it refuses back-references and look-arounds). A backtracking engine takes
exponential time on ``(a+)+b`` against a run of a's ending in another letter (the
classic catastrophic-backtracking example, common practice).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from acquire.errors import ConfigError
from acquire.plan import load_plan
from acquire.station.config import SerialRule, station_config
from acquire.station.errors import SerialRefused
from acquire.station.pattern import PatternError, compile_pattern
from acquire.station.serials import check_serial

PLAN = """\
plan: patch-check
instrument: {resource: "TCPIP::127.0.0.1::5025::SOCKET", dialect: scpi-generic}
stimulus: {start: 2.3 GHz, stop: 2.6 GHz, points: 301, power: -10 dBm, if_bandwidth: 1 kHz}
measure: S11
"""


def test_catastrophic_pattern_is_refused_at_once_in_a_subprocess() -> None:
    """Under a backtracking engine this never finishes (2**63 paths); here it must."""
    from hostile_support import run_limited

    code = ("import sys; from acquire.station.config import SerialRule; "
            "from acquire.station.serials import check_serial; "
            "from acquire.station.errors import SerialRefused\n"
            "try:\n    check_serial('a' * 63 + 'c', SerialRule('(a+)+b', 128))\n"
            "except SerialRefused as exc:\n    print(exc)\n")
    result = run_limited([], code=code, timeout=30)
    assert result.returncode == 0, result.stderr
    assert "does not match the pattern (a+)+b" in result.stdout
    assert result.stderr == ""


def test_nested_quantifiers_still_match_what_they_should() -> None:
    rule = SerialRule("(a+)+b", 128)
    assert check_serial("a" * 100 + "b", rule) == "a" * 100 + "b"
    with pytest.raises(SerialRefused):
        check_serial("a" * 127 + "c", rule)


@pytest.mark.parametrize(("pattern", "reason"), [
    (r"(A)\1", "invalid escape sequence"),
    ("PA(?=-)", "invalid perl operator"),
    ("(?<!x)PA", "invalid perl operator"),
    ("((a{1,1000}){1,1000}){1,1000}", "pattern too large|invalid repetition size"),
    ("PA-[0-9", "missing ]"),
    ("A" * 300, "is 300 characters long, at most 256"),
])
def test_patterns_that_cannot_be_bounded_are_rejected_in_one_line(
        tmp_path: Path, capfd, pattern: str, reason: str) -> None:
    path = tmp_path / "p.yaml"
    quoted = pattern.replace("\\", "\\\\")
    path.write_text(PLAN + f'station:\n  serial: {{pattern: "{quoted}"}}\n')
    with pytest.raises(ConfigError, match=reason) as info:
        station_config(load_plan(path))
    assert "station.serial.pattern: " in str(info.value) and "\n" not in str(info.value)
    assert capfd.readouterr().err == ""  # the engine prints nothing of its own


def test_the_default_and_shipped_patterns_compile() -> None:
    from acquire.station.config import DEFAULT_PATTERN

    assert compile_pattern(DEFAULT_PATTERN).fullmatch("AB-12_x.3")
    assert compile_pattern("PA-[0-9]{4}").fullmatch("PA-0042")
    with pytest.raises(PatternError):
        compile_pattern("(x)\\1")
