"""The writer against the writer checklist of the Touchstone File Format Specification 2.0.

Each test names the rule ("TS2.0") it checks; files are inspected as text, so the
checks do not depend on our own reader.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from acquire.errors import SweepdError, TouchstoneError
from acquire.sweep import Sweep
from acquire.touchstone import (
    TouchstoneOptions,
    format_touchstone,
    parse_touchstone,
    read_touchstone,
    write_touchstone,
)
from acquire.touchstone.writer import DB_ZERO


def sweep_of(ports: int, points: int = 3, z0=None, meta=None, seed: int = 1) -> Sweep:
    rng = np.random.default_rng(seed)
    shape = (points, ports, ports)
    s = 0.5 * (rng.normal(size=shape) + 1j * rng.normal(size=shape))
    freq = 2.4e9 + 1e6 * np.arange(points)
    return Sweep(freq, s, z0 or (50.0,) * ports, meta or {})


def data_lines(text: str) -> list[list[str]]:
    """Token lists of the non-comment, non-keyword lines after the option line."""
    lines = text.splitlines()
    start = next(k for k, line in enumerate(lines) if line.startswith("#")) + 1
    return [line.split() for line in lines[start:]
            if line.strip() and not line.startswith(("!", "["))]


def test_one_explicit_option_line_before_the_data():
    # TS2.0 checklist: exactly one option line, every field explicit, before any data
    text = format_touchstone(sweep_of(1), TouchstoneOptions(fmt="MA", freq_unit="MHz"))
    options = [line for line in text.splitlines() if line.startswith("#")]
    assert options == ["# MHz S MA R 50"]
    assert text.index("# MHz") < text.index("\n2400.000000 ")


def test_version_2_keyword_order_and_end_last():
    # TS2.0: [Version], option line, [Number of Ports], ..., [Network Data], [End]
    text = format_touchstone(sweep_of(2, z0=(50.0, 75.0)), TouchstoneOptions(version="2.0"))
    keys = [line.split("]")[0] + "]" if line.startswith("[") else line.split()[0]
            for line in text.splitlines() if line.startswith(("[", "#"))]
    assert keys == ["[Version]", "#", "[Number of Ports]", "[Two-Port Data Order]",
                    "[Number of Frequencies]", "[Reference]", "[Network Data]", "[End]"]
    assert text.endswith("[End]\n")
    assert "[Reference] 50 75\n" in text and "[Number of Frequencies] 3\n" in text


def test_version_1_1_has_no_keywords_and_lists_r_per_port():
    # TS2.1: version 1.1 is keyword-free; R takes one value per port when they differ
    text = format_touchstone(sweep_of(3, z0=(50.0, 75.0, 25.0)))
    assert "[" not in text
    assert "# Hz S RI R 50 75 25\n" in text


def test_version_1_two_port_order_11_21_12_22():
    # TS2.0: the 2-port exception, N11 N21 N12 N22 on one line
    s = np.array([[[0.11 + 0.011j, 0.12 + 0.012j], [0.21 + 0.021j, 0.22 + 0.022j]]])
    line = data_lines(format_touchstone(Sweep([1e9], s)))[0]
    assert [float(v) for v in line[1:]] == [0.11, 0.011, 0.21, 0.021, 0.12, 0.012, 0.22, 0.022]


def test_version_2_two_port_writes_12_21_row_major():
    s = np.array([[[0.11 + 0.011j, 0.12 + 0.012j], [0.21 + 0.021j, 0.22 + 0.022j]]])
    text = format_touchstone(Sweep([1e9], s), TouchstoneOptions(version="2.0"))
    assert "[Two-Port Data Order] 12_21\n" in text
    line = data_lines(text)[0]
    assert [float(v) for v in line[1:]] == [0.11, 0.011, 0.12, 0.012, 0.21, 0.021, 0.22, 0.022]


@pytest.mark.parametrize("ports", [3, 4, 5, 6, 9])
def test_at_most_four_pairs_per_line_each_row_on_a_new_line(ports):
    # TS2.0: 1.x lines hold at most 4 pairs; each matrix row begins on a new line
    lines = data_lines(format_touchstone(sweep_of(ports, points=2)))
    per_row = [2 * min(4, ports - c) for c in range(0, ports, 4)]
    expected = ([1 + per_row[0]] + per_row[1:] + per_row * (ports - 1)) * 2
    assert [len(tokens) for tokens in lines] == expected


def test_z_normalised_in_1_1_absolute_in_2_0():
    # TS2.0 option line: 1.x Z is Z/R, 2.x Z in ohms. A matched load (Gamma = 0) is
    # Z = R = 75 ohm (Pozar, Microwave Engineering, 4th ed., ch. 2): 1 and 75.
    sweep = Sweep([1e9], [[[0.0]]], (75.0,))
    v1 = data_lines(format_touchstone(sweep, TouchstoneOptions(parameter="Z")))[0]
    v2 = data_lines(format_touchstone(sweep, TouchstoneOptions(parameter="Z", version="2.0")))[0]
    assert float(v1[1]) == pytest.approx(1.0, abs=1e-15)
    assert float(v2[1]) == pytest.approx(75.0, rel=1e-15)


def test_y_normalised_as_y_times_r_in_1_1():
    # Normalised admittance y = Y*Z0 (Pozar ch. 2): Gamma = -1/3 is Z = 25 ohm at
    # Z0 = 50, so Y = 0.04 S and y = 2; version 2.0 stores 0.04 S
    sweep = Sweep([1e9], [[[-1 / 3]]], (50.0,))
    v1 = data_lines(format_touchstone(sweep, TouchstoneOptions(parameter="Y")))[0]
    v2 = data_lines(format_touchstone(sweep, TouchstoneOptions(parameter="Y", version="2.0")))[0]
    assert float(v1[1]) == pytest.approx(2.0, rel=1e-14)
    assert float(v2[1]) == pytest.approx(0.04, rel=1e-14)


def test_metadata_and_free_comments_at_the_top():
    meta = {"plan": "patch-2g45", "serial": "A0042", "stimulus": {"points": 3, "ifbw": 1000.0},
            "cal.age_s": 120}
    text = format_touchstone(sweep_of(1, meta=meta), comments=["verdict: pass", "limit: 10"])
    head = text.splitlines()[:8]
    assert head == ['! written by sweepd', '! plan: "patch-2g45"', '! serial: "A0042"',
                    '! stimulus: {"points":3,"ifbw":1000.0}', "! cal.age_s: 120", "!",
                    "! verdict: pass", "! limit: 10"]
    back = parse_touchstone(text, ports=1)
    assert dict(back.meta) == meta
    assert back.comments == ("verdict: pass", "limit: 10")    # not taken for metadata


def test_text_is_ascii_whatever_the_metadata_and_comments():
    # TS2.0: printable ASCII only; JSON escapes non-ASCII metadata, comments are escaped
    meta = {"operator": "J\u00f6rg", "note": "line one\nline two", "unit": "\u03a9"}
    text = format_touchstone(sweep_of(1, meta=meta), comments=["5 \u00b5m gap\ttab", "a\nb"])
    raw = text.encode("ascii")
    assert all(0x20 <= b < 0x7F or b in b"\t\n" for b in raw)
    assert "! 5 \\xb5m gap\ttab\n! a\n! b\n" in text
    back = parse_touchstone(text, ports=1)
    assert dict(back.meta) == meta


def test_nan_and_inf_are_refused_naming_parameter_and_frequency():
    s = np.zeros((2, 2, 2), complex)
    s[1, 1, 0] = complex(math.nan, 0)
    with pytest.raises(TouchstoneError, match=r"touchstone <text>: S21 at 2\.45 GHz is .*NaN/Inf"):
        format_touchstone(Sweep([2.4e9, 2.45e9], s))


@pytest.mark.parametrize("freq", [[2e9, 1e9], [1e9, 1e9], [-1.0, 1e9], [1e9, math.inf]])
def test_bad_frequencies_are_refused(freq):
    with pytest.raises(TouchstoneError, match="frequenc"):
        format_touchstone(Sweep(freq, np.zeros((2, 1, 1))))


def test_bad_metadata_is_refused_naming_the_key():
    with pytest.raises(TouchstoneError, match=r"meta key 'bad key' must match"):
        format_touchstone(sweep_of(1, meta={"bad key": 1}))
    with pytest.raises(TouchstoneError, match=r"meta key 'when': value is not plain JSON"):
        format_touchstone(sweep_of(1, meta={"when": object()}))
    with pytest.raises(TouchstoneError, match=r"meta key 'x': value is not plain JSON"):
        format_touchstone(sweep_of(1, meta={"x": math.nan}))


def test_dense_sweep_near_10ghz_stays_strictly_increasing_in_ghz():
    # common practice: enough digits for 1 Hz steps at 10 GHz (11 significant digits)
    freq = 9_999_995_000.0 + np.arange(10001)
    sweep = Sweep(freq, np.full((10001, 1, 1), 0.5 + 0.25j))
    text = format_touchstone(sweep, TouchstoneOptions(freq_unit="GHz"))
    assert "\n 9.999995000 " in text and "\n10.000005000 " in text
    back = parse_touchstone(text, ports=1)
    np.testing.assert_array_equal(back.freq_hz, freq)


def test_db_of_exact_zero_is_written_as_the_floor_and_reads_back_as_zero():
    # common practice: -inf dB cannot be written; the floor reads back as 0.0 exactly
    text = format_touchstone(Sweep([1e9], [[[0.0]]]), TouchstoneOptions(fmt="DB"))
    assert float(data_lines(text)[0][1]) == DB_ZERO
    assert parse_touchstone(text, ports=1).data[0, 0, 0] == 0


@pytest.mark.parametrize("digits", [1, 5, 13, 15, 16, 17])
def test_precision_sets_significant_digits(digits):
    text = format_touchstone(Sweep([1e9], [[[1 / 3 - 2j / 3]]]),
                             TouchstoneOptions(precision=digits))
    re_text = data_lines(text)[0][1]
    mantissa = re_text.split("e")[0].replace(".", "").lstrip("-")
    assert len(mantissa) == digits
    assert float(re_text) == pytest.approx(1 / 3, rel=10.0 ** (1 - digits))


def test_write_never_overwrites_and_returns_the_name_used(tmp_path):
    first = write_touchstone(tmp_path / "A0042.s1p", sweep_of(1))
    before = first.read_bytes()
    second = write_touchstone(tmp_path / "A0042.s1p", sweep_of(1, seed=2))
    assert first.name == "A0042.s1p" and second.name == "A0042-2.s1p"
    assert first.read_bytes() == before
    assert not list(tmp_path.glob(".tmp-*"))
    np.testing.assert_allclose(read_touchstone(second).data, sweep_of(1, seed=2).s, rtol=1e-14)


def test_write_with_unique_false_refuses_a_taken_name(tmp_path):
    first = write_touchstone(tmp_path / "A0042.s1p", sweep_of(1), unique=False)
    with pytest.raises(FileExistsError):
        write_touchstone(first, sweep_of(1, seed=2), unique=False)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["A0042.s1p"]


@pytest.mark.parametrize(("name", "options", "message"), [
    ("x.s2p", TouchstoneOptions(), r"the name says 2 ports but the sweep has 1 \(use \.s1p\)"),
    ("x.ts", TouchstoneOptions(), r"must end in \.s1p \(version 1\.1 readers"),
    ("x.txt", TouchstoneOptions(version="2.0"), r"must end in \.s1p or \.ts"),
])
def test_file_name_must_match_the_port_count(tmp_path, name, options, message):
    with pytest.raises(TouchstoneError, match=message):
        write_touchstone(tmp_path / name, sweep_of(1), options)
    assert not list(tmp_path.iterdir())


def test_ts_extension_and_parameter_letter_accepted(tmp_path):
    assert write_touchstone(tmp_path / "x.ts", sweep_of(2), TouchstoneOptions(version="2.0"))
    assert write_touchstone(tmp_path / "x.z2p", sweep_of(2, seed=4),
                            TouchstoneOptions(parameter="Z"))


def test_unwritable_folder_is_a_clear_error(tmp_path):
    blocker = tmp_path / "file"
    blocker.write_text("")
    with pytest.raises(TouchstoneError, match="cannot write"):
        write_touchstone(blocker / "sub" / "x.s1p", sweep_of(1))


@pytest.mark.parametrize(("field", "value"), [
    ("version", "3.0"), ("fmt", "XY"), ("freq_unit", "THz"), ("precision", 0),
    ("precision", 18), ("precision", "max"), ("parameter", "H"),
])
def test_bad_options_are_refused(field, value):
    with pytest.raises(TouchstoneError, match=f"touchstone options: {field}"):
        TouchstoneOptions(**{field: value})


def test_options_are_case_insensitive_and_normalised():
    opt = TouchstoneOptions(fmt="db", freq_unit="ghz", parameter="z", precision="full")
    assert (opt.fmt, opt.freq_unit, opt.parameter, opt.precision) == ("DB", "GHz", "Z", 17)
    assert issubclass(TouchstoneError, SweepdError)
