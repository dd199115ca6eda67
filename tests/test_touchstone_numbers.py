"""Vectorised number formatting and parsing against Python's own conversions.

Python's ``float()`` is correctly rounded (IEEE 754 conversion, David Gay's algorithm)
and ``'%.*e'`` prints the correctly rounded decimal, so both serve as the outside oracle.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from acquire.sweep import Sweep
from acquire.touchstone import (
    TouchstoneOptions,
    datasets,
    format_touchstone,
    numformat,
    numparse,
    parse_touchstone,
)
from acquire.touchstone.datasets import read_section

EXTREMES = np.array([0.0, -0.0, 5e-324, -2.2250738585072014e-308, 1.7976931348623157e308,
                     9.999999999999999e22, 1e23, 0.1, 1.0, 9.5, 99.99999999999999, 1e-5,
                     123456789012345.6, -0.5, 1e100, 1e-100])


def fields_text(fields: np.ndarray) -> list[bytes]:
    return [bytes(row) for row in fields]


@pytest.mark.parametrize("digits", [1, 2, 6, 13, 15])
def test_scientific_fields_match_python_within_half_a_unit(digits):
    rng = np.random.default_rng(digits)
    x = np.concatenate([EXTREMES,
                        rng.normal(size=2000) * 10.0 ** rng.integers(-300, 300, size=2000)])
    fields = numformat.scientific_fields(x, digits)
    assert fields.shape[1] == numformat.scientific_width(digits, 3)
    for value, text in zip(x, fields_text(fields), strict=True):
        mine = float(text)
        if value == 0:
            assert mine == 0 and np.signbit(mine) == np.signbit(value)
            continue
        python = float(f"{value:.{digits - 1}e}")
        if np.isinf(python):          # rounds past the largest double, in Python too
            continue
        # within half a unit of the last digit plus a few parts in 1e16 (the scaling by
        # a power of ten is one or two roundings), so next to a tie it may differ by one
        unit = 10.0 ** (np.floor(np.log10(abs(python))) - digits + 1)
        assert mine == python or abs(mine - value) <= 0.5 * unit + 1e-15 * abs(value), text
        assert text[:1] == (b"-" if value < 0 else b" ")


def test_scientific_fields_two_digit_exponent_when_possible():
    out = numformat.scientific_fields(np.array([0.5, -25.0]), 4)
    assert fields_text(out) == [b" 5.000e-01", b"-2.500e+01"]


def test_fixed_point_fields_move_the_point_as_text():
    ints = np.array([915_000_000, 2_450_000_001, 10_000])
    out = numformat.fixed_point_fields(ints, np.zeros(3, np.int64), 0, 9)
    assert fields_text(out) == [b"0.915000000", b"2.450000001", b"0.000010000"]
    out = numformat.fixed_point_fields(np.array([5, 12]), np.array([25, 5]), 2, 0)
    assert fields_text(out) == [b" 5.25", b"12.05"]


@settings(max_examples=200, deadline=None)
@given(st.integers(0, 2**64 - 1), st.integers(-360, 360))
def test_decimal_to_float_is_correctly_rounded(mantissa, exponent):
    values, unresolved = numparse.decimal_to_float(np.array([mantissa], np.uint64),
                                                   np.array([exponent], np.int64))
    if not unresolved[0]:
        assert values[0] == float(f"{mantissa}e{exponent}")


def test_decimal_to_float_halfway_cases_round_to_even():
    # 2**53 + 1 lies exactly half-way between two doubles; ties go to the even one
    m = np.array([2**53 + 1, 2**53 + 3, 9007199254740993 * 10**2], np.uint64)
    e = np.array([0, 0, -2], np.int64)
    values, unresolved = numparse.decimal_to_float(m, e)
    for k in range(3):
        python = float(f"{int(m[k])}e{int(e[k])}")
        assert unresolved[k] or values[k] == python
    assert values[0] == 9007199254740992.0


def test_float_shifted_moves_the_exponent_exactly():
    assert numparse.float_shifted(b"2.4500000005", 9) == 2450000000.5
    assert numparse.float_shifted(b"1.5E-3", 9) == 1.5e6
    assert numparse.float_shifted(b".915", 9) == 915e6
    assert numparse.float_shifted(b"7", 0) == 7.0


def layout(rows: list[str]) -> bytes:
    return ("\n".join(rows) + "\n").encode("ascii")


def test_parse_records_exact_for_a_regular_layout():
    rng = np.random.default_rng(3)
    x = rng.normal(size=(500, 4)) * 10.0 ** rng.integers(-12, 6, size=(500, 4))
    rows = [f"{1000 + k:>6d} " + " ".join(f"{v: .16e}" for v in x[k]) for k in range(500)]
    block = layout(rows)
    out = numparse.parse_records(block, 0, len(block), len(block) // 500,
                                 np.array([6, 0, 0, 0, 0]))
    assert out is not None
    expected = [[float(t) for t in r.split()] for r in rows]
    for k in range(500):
        expected[k][0] = float(rows[k].split()[0] + "e6")
    np.testing.assert_array_equal(out, np.array(expected))


def test_parse_records_right_aligned_column_reads_blanks_as_leading_zeros():
    block = layout(["  915 0.5", " 2450 -0.25", "10000 1.75"])
    assert numparse.parse_records(block, 0, len(block), 11, np.array([0, 0])) is None  # widths
    block = layout(["  915  0.50", " 2450 -0.25", "10000  1.75"])
    out = numparse.parse_records(block, 0, len(block), 12, np.array([0, 0]))
    np.testing.assert_array_equal(out, [[915, 0.5], [2450, -0.25], [10000, 1.75]])


@pytest.mark.parametrize("bad_row", ["2 1.5-2.5e+00", "2 1.5e 2.5e+00", "2  1.5e+00-2.5",
                                     "2 1.5x+00 2.50", " 2 1.50  2.50"])
def test_parse_records_refuses_rows_that_differ_from_the_first(bad_row):
    good = "1 1.5e+00 2.5e+00"
    block = layout([good, bad_row.ljust(len(good))[:len(good)]])
    assert numparse.parse_records(block, 0, len(block), len(good) + 1,
                                  np.array([0, 0, 0])) is None


def test_out_of_range_number_goes_to_the_error_path():
    block = layout(["1 1.5e+00", "2 1.5e+999"])
    assert numparse.parse_records(block, 0, len(block), 10, np.array([0, 0, 0])) is None
    with pytest.raises(ValueError, match="out of range"):
        read_section(block, 0, len(block), 1, 3, 0)


def test_section_falls_back_to_tokens_and_reports_the_error():
    # the same malformed row through read_section: the general path names the line
    data = b"1 1.5e+00 2.5e+00\n2 1.5-2.5e+00 0\n"
    with pytest.raises(ValueError, match=r"'1.5-2.5e\+00' is not a number") as info:
        read_section(data, 0, len(data), 10, 3, 0)
    assert info.value.line == 11


def test_regular_and_general_paths_agree():
    rng = np.random.default_rng(9)
    x = rng.normal(size=(300, 4))
    regular = layout([f"{k + 1:4d} " + " ".join(f"{v: .14e}" for v in x[k]) for k in range(300)])
    general = layout([f"{k + 1} " + " ".join(repr(float(v)) for v in x[k]) for k in range(300)])
    a = read_section(regular, 0, len(regular), 1, 5, 3)
    b = read_section(general, 0, len(general), 1, 5, 3)
    np.testing.assert_allclose(a.values, b.values, rtol=1e-14)
    np.testing.assert_array_equal(a.values[:, 0], 1e3 * np.arange(1, 301))
    np.testing.assert_array_equal(a.lines, np.arange(1, 301))


@pytest.mark.parametrize("ports", [1, 2, 3, 5])
@pytest.mark.parametrize("version", ["1.1", "2.0"])
@pytest.mark.parametrize(("fmt", "unit", "precision"), [("RI", "Hz", None), ("MA", "GHz", 13),
                                                        ("DB", "kHz", "full")])
def test_files_we_write_take_the_fixed_layout_path(monkeypatch, ports, version, fmt, unit,
                                                   precision):
    # speed guard: sweepd's own files must never need the per-token path
    def refuse(*args, **kwargs):
        raise AssertionError("general path used")
    monkeypatch.setattr(datasets, "_general", refuse)
    rng = np.random.default_rng(ports)
    freq = np.linspace(10e6, 6e9, 40)            # crosses a decade: right-aligned column
    s = rng.normal(size=(40, ports, ports)) + 1j * rng.normal(size=(40, ports, ports))
    text = format_touchstone(Sweep(freq, s), TouchstoneOptions(version, fmt, unit, precision))
    np.testing.assert_allclose(parse_touchstone(text, ports=ports).data, s, rtol=1e-12)
