"""Reader errors: one line, naming the file and line, for every defect it refuses.

What must be refused or tolerated follows the Touchstone File Format Specification 2.0
("TS2.0") and 2.1 ("TS2.1"); tolerance in lenient mode is common practice among
readers and is reported in ``warnings``; ``strict=True`` turns those notes into errors.
"""

from __future__ import annotations

import numpy as np
import pytest

from acquire.errors import SweepdError, TouchstoneError
from acquire.touchstone import parse_touchstone, read_touchstone

V2 = "[Version] 2.0\n# GHz S RI R 50\n"


def fails(text: str, pattern: str, *, name: str = "dut.s1p", ports: int | None = 1,
          strict: bool = False) -> TouchstoneError:
    with pytest.raises(TouchstoneError, match=pattern) as info:
        parse_touchstone(text, name=name, ports=ports, strict=strict)
    message = str(info.value)
    assert "\n" not in message and message.startswith(f"touchstone {name}: ")
    return info.value


def one_port(lines: int, last: str) -> str:
    body = "".join(f"{k + 1} 0.{k} 0\n" for k in range(lines))
    return "! unit 7\n# GHz S RI R 50\n" + body + last


def test_wrong_count_message_as_documented():
    # TS2.0: 1 + 2 N^2 numbers per data set; a stray even line after a full set
    text = one_port(9, "10 0.5\n")           # line 12 holds 2 numbers
    fails(text, r"^touchstone unit7.s1p: line 12: expected 3 numbers per data set, found 2$",
          name="unit7.s1p")


def test_wrong_count_inside_a_multi_line_set():
    # 3-port: 19 numbers per set; the second set is one pair short over three lines
    row = "0.1 0 0.2 0 0.3 0\n"
    text = "# GHz S RI R 50\n1 " + row + row + row + "2 " + row + row + "0.1 0 0.2 0\n"
    fails(text, r"line 5: expected 19 numbers per data set, found 17 over lines 5-7", ports=3)


def test_first_data_line_with_even_count():
    fails("# GHz S RI R 50\n0.5 0.1\n", r"line 2: expected 3 numbers per data set, found 2")


@pytest.mark.parametrize(("token", "pattern"), [
    ("1.2.3", r"line 3: '1.2.3' is not a number"),
    ("1e", r"line 3: '1e' is not a number"),
    ("--1", r"line 3: '--1' is not a number"),
    ("1e999", r"line 3: '1e999' is out of range"),
    ("abc", r"line 3: unexpected 'a' in numeric data"),
    ("nan", r"line 3: unexpected 'n' in numeric data"),
    ("1_0", r"line 3: unexpected '_' in numeric data"),
])
def test_bad_numbers_are_named(token, pattern):
    fails(f"# GHz S RI R 50\n1 0.1 0\n2 {token} 0\n", pattern)


def test_non_ascii_byte_in_data_is_an_error(tmp_path):
    path = tmp_path / "dut.s1p"
    path.write_bytes(b"# GHz S RI R 50\n1 0.1 0\n2 0.2\xb5 0\n")
    with pytest.raises(TouchstoneError, match=r"line 3: byte 0xb5 is not allowed outside "
                                              r"comments"):
        read_touchstone(path)


@pytest.mark.parametrize(("option", "pattern"), [
    ("# GHz S XY R 50", r"line 1: option line: unknown field 'XY'"),
    ("# GHz Q RI R 50", r"line 1: option line: unknown field 'Q'"),
    ("# GHz S RI R", r"line 1: option line: R must be followed by a resistance"),
    ("# GHz S RI R 0", r"line 1: option line: reference resistance must be positive"),
    ("# GHz MHz S RI", r"line 1: option line: frequency unit given twice"),
    ("# GHz S RI R 50 75", r"line 1: option line gives 2 reference resistances for 1 ports"),
])
def test_bad_option_lines(option, pattern):
    # TS2.0: unknown format or parameter letters are errors
    fails(option + "\n1 0.1 0\n", pattern)


def test_keyword_in_a_version_1_file():
    # TS2.0: version 2 keywords are not allowed in version 1 files
    fails("# GHz S RI R 50\n1 0.1 0\n[End]\n", r"line 3: keyword in a version 1 file")


def test_bracket_in_a_comment_is_not_a_keyword():
    f = parse_touchstone("# GHz S DB R 50\n! S11 [dB] [deg]\n1 -3 10 ! [x]\n", ports=1)
    assert f.comments == ("S11 [dB] [deg]", "[x]")


def test_decreasing_two_port_frequency_explains_the_noise_rule():
    # TS2.0: in 1.x a frequency drop starts the noise block (5 numbers per line)
    text = "# GHz S RI R 50\n2 " + "0.1 0 " * 4 + "\n1 " + "0.1 0 " * 4 + "\n"
    fails(text, r"line 3: expected 5 numbers per noise line, found 9 \(the frequency drops "
                r"here", ports=2)


def test_noise_frequencies_must_increase():
    text = ("# GHz S RI R 50\n1 " + "0.1 0 " * 4 + "\n2 " + "0.1 0 " * 4 +
            "\n1.5 1 0.5 10 0.3\n1.5 1 0.5 10 0.3\n")
    fails(text, r"line 5: frequency 1500000000 Hz is not above the previous noise line",
          ports=2)


@pytest.mark.parametrize(("text", "pattern"), [
    ("[Version] 3.0\n", r"line 1: \[Version\] must be 2.0 or 2.1, got '3.0'"),
    ("[Number of Ports] 1\n", r"line 1: a version 2 file must start with \[Version\]"),
    (V2 + "[Network Data]\n1 0.1 0\n[End]\n", r"missing \[Number of Ports\]"),
    (V2 + "[Number of Ports] 1\n[Number of Ports] 1\n", r"line 4: \[Number of Ports\] given twice"),
    (V2 + "[Number of Ports] x\n", r"line 3: \[Number of Ports\] must be an integer >= 1"),
    (V2 + "[Number of Ports] 2\n[Reference] 50\n[Network Data]\n",
     r"line 4: \[Reference\] needs 2 values, found 1"),
    (V2 + "[Number of Ports] 1\n[Reference] 50 75\n", r"line 4: \[Reference\] has 2 values"),
    (V2 + "[Number of Ports] 1\n[Reference] -5\n", r"line 4: \[Reference\] value -5 must be"),
    (V2 + "[Number of Ports] 1\n[Matrix Format] Diagonal\n", r"\[Matrix Format\] must be Full"),
    (V2 + "[Number of Ports] 2\n[Two-Port Data Order] 11_22\n", r"12_21 or 21_12, got '11_22'"),
    (V2 + "[Number of Ports] 2\n[Mixed-Mode Order] D1,2 X\n", r"label 'X' is not D<i>,<j>"),
    (V2 + "[Number of Ports] 1\n[Begin Information]\nfree\n", r"line 4: \[Begin Information\] "
                                                              r"without \[End Information\]"),
    (V2 + "[Number of Ports] 1\n[Number of Frequencies] 1\n", r"no \[Network Data\] keyword"),
    (V2 + "[Number of Ports] 1\n[Number of Frequencies] 1\n[Network Data]\n1 0.1 0\n"
          "[Noise Data]\n1 1 0.5 10 20\n[End]\n",
     r"line 7: \[Noise Data\] is only allowed in 2-port files \(this one has 1 ports\)"),
    (V2 + "[Number of Ports] 2\n[Two-Port Data Order] 12_21\n[Number of Frequencies] 1\n"
          "[Number of Noise Frequencies] 2\n[Network Data]\n1 " + "0.1 0 " * 4 +
          "\n[Noise Data]\n1 1 0.5 10 20\n[End]\n",
     r"line 6: \[Number of Noise Frequencies\] is 2 but \[Noise Data\] holds 1 lines"),
    (V2 + "[Number of Ports] 1\n[Number of Frequencies] 1\n[Network Data]\n1 0.1 0\n"
          "[Noise Data] now\n", r"line 7: \[Noise Data\] takes no argument"),
    (V2 + "[Number of Ports] 1\n[Number of Frequencies] 1\n[Network Data]\n1 0.1 0\n"
          "[Frobnicate]\n", r"line 7: expected \[End\] or \[Noise Data\], found \[frobnicate\]"),
    (V2 + "[Number of Ports] 1\n[Number of Frequencies] 1\n[Network Data]\n[End]\n",
     r"line 6: no network data"),
])
def test_version_2_structure_errors(text, pattern):
    # TS2.0 keyword rules: order, required keywords, counts, [End] last
    fails(text, pattern, name="dut.ts", ports=None)


def test_h_parameters_need_two_ports():
    # TS2.0: H and G are 2-port matrices
    fails("# GHz H RI R 50\n1 0.1 0\n", r"line 1: H parameters need a 2-port file")


def test_port_count_from_name_must_agree_with_number_of_ports(tmp_path):
    path = tmp_path / "dut.s2p"
    path.write_text(V2 + "[Number of Ports] 1\n[Number of Frequencies] 1\n[Network Data]\n"
                         "1 0.1 0\n[End]\n")
    with pytest.raises(TouchstoneError, match=r"dut.s2p: line 3: \[Number of Ports\] is 1 but "
                                              r"the file name says 2"):
        read_touchstone(path)


def test_missing_file_is_a_clear_error(tmp_path):
    with pytest.raises(TouchstoneError, match=r"touchstone .*nothere.s1p: cannot read"):
        read_touchstone(tmp_path / "nothere.s1p")


def test_empty_text():
    fails("", r"no option line and no data")
    fails("! only a comment\n# GHz S RI R 50\n", r"no network data")


def test_errors_are_sweepd_errors():
    assert issubclass(TouchstoneError, SweepdError)


# -- lenient notes and strict mode --------------------------------------------------------

def test_port_count_inferred_when_the_name_does_not_tell():
    # TS2.0: 1.x takes N from the extension; lenient readers can count the first set
    f = parse_touchstone("# GHz S RI R 50\n1 " + "0.1 0 " * 4 + "\n", name="x.txt")
    assert f.ports == 2 and "port count 2 inferred" in f.warnings[0]
    fails("# GHz S RI R 50\n1 " + "0.1 0 " * 4 + "\n", r"line 2: port count 2 inferred .*strict",
          name="x.txt", ports=None, strict=True)
    fails("# GHz S RI R 50\n1 0.1 0 0.2\n", r"cannot tell the port count", name="x.txt",
          ports=None)


def test_unknown_keyword_is_a_note_or_a_strict_error():
    text = (V2 + "[Number of Ports] 1\n[Vendor Thing] 7\n[Number of Frequencies] 1\n"
                 "[Network Data]\n1 0.1 0\n[End]\n")
    f = parse_touchstone(text)
    assert f.warnings == ("line 4: unknown keyword [vendor thing] ignored",)
    fails(text, r"line 4: unknown keyword \[vendor thing\] ignored \(strict mode\)",
          name="<text>", ports=None, strict=True)


def test_text_after_end_is_a_note():
    text = (V2 + "[Number of Ports] 1\n[Number of Frequencies] 1\n[Network Data]\n1 0.1 0\n"
                 "[End]\n! trailing comment\nstray words\n")
    f = parse_touchstone(text)
    assert f.warnings == ("line 9: text after [End] ignored",)
    assert "trailing comment" in f.comments


def test_missing_number_of_frequencies_is_a_note():
    text = V2 + "[Number of Ports] 1\n[Network Data]\n1 0.1 0\n2 0.2 0\n[End]\n"
    f = parse_touchstone(text)
    assert len(f.freq_hz) == 2 and "[Number of Frequencies] is missing" in f.warnings[0]


def test_option_line_after_the_data_is_an_error():
    # TS2.0: in 1.x the option line precedes all data
    fails("1 0.1 0\n# GHz S RI R 50\n2 0.1 0\n", r"line 2: option line after the data")


def test_second_option_line_between_data_is_ignored_with_a_note():
    f = parse_touchstone("# GHz S RI R 50\n1 0.1 0\n# MHz S MA R 75\n2 0.2 0\n", ports=1)
    np.testing.assert_array_equal(f.freq_hz, [1e9, 2e9])
    assert f.warnings == ("line 3: second option line ignored (the first is on line 1)",)


def test_tolerated_forms_give_no_warnings():
    # TS2.0: case, tabs, CR, CR/LF, trailing blanks, comments at line end, blank lines
    text = "!c\r# ghz s ri r 50\r\n\r\n1\t0.1 0 ! x\n  \n2 0.2 0   \r"
    f = parse_touchstone(text, ports=1)
    assert f.warnings == () and f.freq_hz.tolist() == [1e9, 2e9]


def test_singular_conversion_names_the_frequency():
    # Z = -R makes Z + R singular: no S-parameters exist there
    f = parse_touchstone("[Version] 2.0\n# MHz Z RI R 50\n[Number of Ports] 1\n"
                         "[Number of Frequencies] 2\n[Network Data]\n915 50 0\n2450 -50 0\n"
                         "[End]\n")
    with pytest.raises(TouchstoneError, match=r"Z data at 2\.45 GHz have no S-parameters"):
        f.to_sweep()
