"""Touchstone reading limits (issue 10.10): port and frequency counts and file size are
checked before memory is allocated; each refusal is one line naming file and line."""

from __future__ import annotations

from pathlib import Path

import pytest

from acquire.errors import TouchstoneError
from acquire.touchstone import parse_touchstone, read_touchstone

ONE_PORT_V2 = "[Version] 2.0\n# GHz S RI R 50\n[Number of Ports] {ports}\n" \
              "[Number of Frequencies] {freqs}\n[Network Data]\n1 0 0\n2 0 0\n[End]\n"


@pytest.mark.parametrize(("name", "text", "message"), [
    ("x.s99999p", "# GHz S RI R 50\n1 0 0\n", r"99999 ports: sweepd reads at most 64 "
                                              r"\(from the file name\)"),
    ("x.s65p", "# GHz S RI R 50\n1 0 0\n", r"65 ports: sweepd reads at most 64"),
    ("x.ts", ONE_PORT_V2.format(ports=100000, freqs=2),
     r"line 3: \[Number of Ports\] is 100000: sweepd reads at most 64$"),
    ("x.ts", ONE_PORT_V2.format(ports="9" * 400, freqs=2),
     r"line 3: \[Number of Ports\] is a number of 400 digits: sweepd reads at most 64$"),
    ("x.ts", ONE_PORT_V2.format(ports=1, freqs=10**12),
     r"line 4: \[Number of Frequencies\] is 1000000000000: sweepd reads at most 1,000,000$"),
])
def test_port_and_frequency_counts_are_bounded(tmp_path: Path, name: str, text: str,
                                               message: str) -> None:
    path = tmp_path / name
    path.write_text(text)
    with pytest.raises(TouchstoneError, match=message) as info:
        read_touchstone(path)
    assert "\n" not in str(info.value) and str(info.value).startswith(f"touchstone {path}: ")


def test_inferred_port_count_is_bounded() -> None:
    # A version 1 file with no port count in its name: 65 ports inferred from the first
    # set (1 + 2 * 65**2 numbers on one line).
    text = "# GHz S RI R 50\n1 " + "0 " * (2 * 65 * 65) + "\n"
    with pytest.raises(TouchstoneError, match=r"line 2: the first data set holds 8451 numbers; "
                                              r"65 ports: sweepd reads at most 64"):
        parse_touchstone(text)


def test_too_many_numbers_are_refused_before_parsing(monkeypatch) -> None:
    monkeypatch.setattr("acquire.touchstone.datasets.MAX_NUMBERS", 8)
    text = "# GHz S RI R 50\n1 0 0\n2 0 0\n3 0 0\n"
    with pytest.raises(TouchstoneError, match=r"line 2: 9 numbers: sweepd reads at most 8 in a "
                                              r"file"):
        parse_touchstone(text, ports=1)


def test_too_many_frequencies_are_refused(monkeypatch) -> None:
    monkeypatch.setattr("acquire.touchstone.datasets.MAX_FREQUENCIES", 2)
    with pytest.raises(TouchstoneError, match=r"3 data sets: sweepd reads at most 2 frequencies"):
        parse_touchstone("# GHz S RI R 50\n1 0 0\n2 0 0\n3 0 0\n", ports=1)


def test_a_file_beyond_the_size_limit_is_refused_unread(tmp_path: Path, monkeypatch) -> None:
    monkeypatch.setattr("acquire.touchstone.reader.MAX_FILE_BYTES", 16)
    path = tmp_path / "x.s1p"
    path.write_text("# GHz S RI R 50\n1 0 0\n2 0 0\n")
    with pytest.raises(TouchstoneError, match=r"larger than 0 MiB, the most sweepd reads"):
        read_touchstone(path)


def test_number_counting_matches_split_across_chunk_edges(monkeypatch) -> None:
    from acquire.touchstone import limits

    monkeypatch.setattr(limits, "_CHUNK", 3)
    data = b"  12 3\t45 \n6 789 0"
    assert limits.count_numbers(data, 0, len(data)) == len(data.split()) == 6
    assert limits.count_numbers(data, 3, len(data)) == len(data[3:].split())


def test_metadata_comments_with_deep_json_stay_comments() -> None:
    deep = "[" * 5000 + "]" * 5000
    text = (f"! written by sweepd\n! plan: \"p\"\n! serial: {deep}\n! big: {'9' * 5000}\n"
            "# GHz S RI R 50\n1 0 0\n")
    ts = parse_touchstone(text, ports=1)
    assert ts.meta == {"plan": "p"}  # the rest stays comment text, nothing raises


@pytest.mark.parametrize("text", [
    "[Version] " + "9" * 1_000_000 + "\n",
    "[Version] 2.0\n# GHz S RI R 50\n[Number of Ports] 1\n[Two-Port Data Order] "
    + "x" * 1_000_000 + "\n",
    "[Version] 2.0\n" + "y" * 1_000_000 + "\n",
    "# GHz S RI R 50 " + "Q" * 1_000_000 + "\n1 0 0\n",
    "# GHz S RI R 50\n1 0 " + "z" * 1_000_000 + "\n",
])
def test_messages_show_a_bounded_part_of_a_huge_line(text: str) -> None:
    with pytest.raises(TouchstoneError) as info:
        parse_touchstone(text, ports=1)
    assert len(str(info.value)) < 400 and "\n" not in str(info.value)
