"""IEEE 488.2 blocks and SCPI value lists (drivers.blocks) and trace layouts (drivers.layouts).

Oracles from outside the project: Python's ``struct`` module packs the IEEE 754 values
with explicit byte order ('>' = FORMat:BORDer NORMal, '<' = SWAPped; SCPI-1999 Vol. 2,
FORMat); block framing follows IEEE Std 488.2 definite and indefinite arbitrary blocks
(clauses 8.7.9/8.7.10, numbers from memory); sentinel values NAN 9.91E37, INF 9.9E37,
NINF -9.9E37 from SCPI-1999 Vol. 1; dB/degree conversions checked against
scikit-rf (``skrf.mathFunctions``).
"""

from __future__ import annotations

import struct

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from drivers.blocks import (
    check_finite,
    decode_ascii,
    decode_binary,
    dtype_for,
    encode_block,
    encode_header,
    expect_length,
    header_size_for,
    parse_header,
    split_block,
)
from drivers.errors import BlockError, ReplyError
from drivers.layouts import from_complex, to_complex

STRUCT = {
    ("real32", "big"): ">f",
    ("real32", "little"): "<f",
    ("real64", "big"): ">d",
    ("real64", "little"): "<d",
}
VALUES = [0.0, 1.0, -0.5, 0.123456789, -1.0e-12, 3.0e8, 2.0**-20]


def packed(values: list[float], encoding: str, order: str) -> bytes:
    fmt = STRUCT[(encoding, order)][0] + STRUCT[(encoding, order)][1] * len(values)
    return struct.pack(fmt, *values)


# -- headers ---------------------------------------------------------------------------
def test_ieee4882_example_header_1002_real64_values() -> None:
    # IEEE Std 488.2 definite-block framing: '#4' + '8016' announces 8016 bytes = 1002 x 8.
    reply = b"#48016" + packed([0.25] * 1002, "real64", "big") + b"\n"
    payload = split_block(reply, b"\n")
    assert len(payload) == 8016
    values = decode_binary(payload, "real64", "big", 1002)
    assert values.shape == (1002,) and np.all(values == 0.25)


@pytest.mark.parametrize(
    ("data", "expected"),
    [
        (b"#15hello", (3, 5)),
        (b"#0abc", (2, None)),
        (b"#10", (3, 0)),
        (b"#211abcdefghijk", (4, 11)),
        (b"#9000000004abcd", (11, 4)),
    ],
)
def test_parse_header_valid(data: bytes, expected: tuple[int, int | None]) -> None:
    assert parse_header(data) == expected


@pytest.mark.parametrize(
    ("data", "words"),
    [
        (b"garbage", "not an IEEE 488.2 block: starts b'garbage'"),
        (b"", "not an IEEE 488.2 block: starts b''"),
        (b"#", "not an IEEE 488.2 block"),
        (b"#x12", "needs a digit after '#', got b'x'"),
        (b"#4 123", "length field b' 123' is not 4 digits"),
        (b"#412", "announces 4 length digits but holds 2"),
        (b"#2a1", "length field b'a1' is not 2 digits"),
        (b"1.0,2.0", "not an IEEE 488.2 block: starts b'1.0,2.0'"),
    ],
)
def test_parse_header_malformed(data: bytes, words: str) -> None:
    with pytest.raises(BlockError) as info:
        parse_header(data)
    assert words in str(info.value)
    assert "\n" not in str(info.value)


def test_error_quotes_only_the_first_bytes() -> None:
    with pytest.raises(BlockError) as info:
        parse_header(b"x" * 500)
    message = str(info.value)
    assert "b'xxxxxxxxxxxxxxxxxxxxxxxx'..." in message and len(message) < 120


def test_header_helpers_round_trip() -> None:
    for length in (0, 1, 9, 10, 3216, 1_600_016, 123_456_789):
        header = encode_header(length)
        assert parse_header(header) == (len(header), length)
        assert header_size_for(length) == len(header)
    with pytest.raises(ValueError):
        encode_header(10**9)


# -- whole blocks ----------------------------------------------------------------------
def test_split_block_definite_with_newline_bytes_in_payload() -> None:
    payload = bytes([10, 0, 10, 10, 13, 10])  # 0x0A inside binary data is just data
    reply = b"#16" + payload + b"\n"
    assert bytes(split_block(reply, b"\n")) == payload


def test_split_block_indefinite_and_empty() -> None:
    assert bytes(split_block(b"#0abc\n", b"\n")) == b"abc"
    assert bytes(split_block(b"#0\n", b"\n")) == b""  # an empty indefinite block
    assert bytes(split_block(b"#10\n", b"\n")) == b""  # '#10' also means empty


@pytest.mark.parametrize(
    ("reply", "words"),
    [
        (b"#15hel", "block truncated: header announces 5 bytes, got 3"),
        (b"#15hello world\n", "followed by b' world\\n', expected b'\\n'"),
        (b"#15hello", "followed by b'', expected b'\\n'"),
        (b"#0abc", "indefinite block does not end with b'\\n'"),
        (b"ERR,-113\n", "not an IEEE 488.2 block: starts b'ERR,-113\\n'"),
    ],
)
def test_split_block_malformed(reply: bytes, words: str) -> None:
    with pytest.raises(BlockError) as info:
        split_block(reply, b"\n")
    assert words in str(info.value)


# -- binary values ---------------------------------------------------------------------
@pytest.mark.parametrize("encoding", ["real32", "real64"])
@pytest.mark.parametrize("order", ["big", "little"])
def test_decode_binary_matches_struct(encoding: str, order: str) -> None:
    raw = packed(VALUES, encoding, order)
    values = decode_binary(raw, encoding, order, len(VALUES))
    expected = struct.unpack(STRUCT[(encoding, order)][0] + STRUCT[(encoding, order)][1] * 7, raw)
    assert values.dtype == np.float64
    assert values.tolist() == list(expected)


@pytest.mark.parametrize("encoding", ["real32", "real64"])
@pytest.mark.parametrize("order", ["big", "little"])
def test_encode_block_matches_struct(encoding: str, order: str) -> None:
    block = encode_block(np.array(VALUES), encoding, order)
    raw = packed(VALUES, encoding, order)
    assert block == encode_header(len(raw)) + raw
    assert encode_block(np.array(VALUES), encoding, order, indefinite=True) == b"#0" + raw


def test_byte_orders_differ_and_dtypes_are_explicit() -> None:
    assert dtype_for("real64", "big") == np.dtype(">f8")
    assert dtype_for("real32", "little") == np.dtype("<f4")
    big = packed([1.0], "real64", "big")
    assert big == b"\x3f\xf0" + b"\x00" * 6  # IEEE 754: 1.0 = 0x3FF0000000000000
    assert decode_binary(big[::-1], "real64", "little", 1).tolist() == [1.0]
    with pytest.raises(ValueError):
        dtype_for("ascii", "big")
    with pytest.raises(ValueError):
        dtype_for("real64", "middle")


@pytest.mark.parametrize(
    ("length", "count", "encoding", "words"),
    [
        (3208, 402, "real64", "block holds 3208 bytes (401 values), expected 3216"),
        (3217, 402, "real64", "not a whole number of values"),
        (1604, 402, "real32", "block holds 1604 bytes (401 values), expected 1608"),
        (0, 2, "real32", "block holds 0 bytes (0 values), expected 8"),
    ],
)
def test_wrong_length(length: int, count: int, encoding: str, words: str) -> None:
    with pytest.raises(BlockError) as info:
        expect_length(length, count, encoding)
    assert words in str(info.value)
    with pytest.raises(BlockError):
        decode_binary(bytes(length), encoding, "big", count)


def test_wrong_length_names_points_and_values() -> None:
    with pytest.raises(BlockError, match=r"expected 3216 = 201 points x 2 values x 8 bytes"):
        expect_length(3200, 402, "real64", "201 points x 2 values")


@pytest.mark.parametrize("encoding", ["real32", "real64"])
@pytest.mark.parametrize(
    ("bad", "words"),
    [
        (float("nan"), "not a number"),
        (float("inf"), "infinite"),
        (-float("inf"), "infinite"),
        (9.91e37, "the SCPI NAN sentinel 9.91E37"),
        (9.9e37, "the SCPI INF sentinel 9.9E37"),
        (-9.9e37, "the SCPI NINF sentinel -9.9E37"),
    ],
)
def test_non_finite_values_are_refused(encoding: str, bad: float, words: str) -> None:
    raw = packed([0.1, 0.2, bad, 0.4], encoding, "big")
    with pytest.raises(BlockError) as info:
        decode_binary(raw, encoding, "big", 4)
    assert f"value 2 is {words}" in str(info.value)
    assert "reply starts b'" in str(info.value)


def test_large_but_legal_values_pass() -> None:
    check_finite(np.array([1e30, -1e30, 9.8e37, -9.8e37]))


# -- ASCII lists -----------------------------------------------------------------------
def test_decode_ascii_number_forms() -> None:
    # NR1, NR2, NR3 with signs and blanks (IEEE Std 488.2 numeric response forms).
    values = decode_ascii(b" 1, -2.5 ,+3.0E+02,4e-3,\t5 ", 5)
    assert values.tolist() == [1.0, -2.5, 300.0, 0.004, 5.0]
    assert decode_ascii("", 0).size == 0
    assert decode_ascii("7", None).tolist() == [7.0]


def test_decode_ascii_count_and_garbage() -> None:
    with pytest.raises(BlockError, match=r"holds 3 values, expected 4: starts b'1,2,3'"):
        decode_ascii(b"1,2,3", 4)
    with pytest.raises(BlockError, match=r"value 1 of the list is not a number: b'2.x'"):
        decode_ascii(b"1,2.x,3", 3)
    with pytest.raises(BlockError, match=r"value 2 is the SCPI NAN sentinel"):
        decode_ascii(b"1,2,9.91E37", 3)
    with pytest.raises(BlockError, match=r"value 0 is not a number"):
        decode_ascii(b"NAN,2", 2)
    with pytest.raises(BlockError, match=r"value 1 of the list is not a number: b''"):
        decode_ascii(b"1,,3", 3)
    assert issubclass(BlockError, ReplyError)


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.floats(min_value=-1e30, max_value=1e30, allow_nan=False), max_size=40),
    st.sampled_from(["real32", "real64", "ascii"]),
    st.sampled_from(["big", "little"]),
)
def test_round_trip_any_values(values: list[float], encoding: str, order: str) -> None:
    array = np.array(values, dtype=np.float64)
    encoded = encode_block(array, encoding, order)
    if encoding == "ascii":
        decoded = decode_ascii(encoded, len(values))
        assert decoded.tolist() == array.tolist()
        return
    decoded = decode_binary(split_block(encoded + b"\n", b"\n"), encoding, order, len(values))
    expected = array.astype(np.float32).astype(np.float64) if encoding == "real32" else array
    assert decoded.tolist() == expected.tolist()


# -- layouts ---------------------------------------------------------------------------
def test_re_im_layout() -> None:
    values = np.array([0.1, -0.2, 0.3, 0.4])
    assert to_complex(values, "re_im").tolist() == [0.1 - 0.2j, 0.3 + 0.4j]


def test_db_deg_layout_against_scikit_rf() -> None:
    import skrf as skrf
    rng = np.random.default_rng(7)
    db = rng.uniform(-60, 0, 50)
    deg = rng.uniform(-180, 180, 50)
    values = np.empty(100)
    values[0::2], values[1::2] = db, deg
    oracle = skrf.mathFunctions.dbdeg_2_reim(db, deg)
    np.testing.assert_allclose(to_complex(values, "db_deg"), oracle, rtol=1e-12, atol=1e-15)
    mag = 10 ** (db / 20)
    values[0::2] = mag
    oracle = skrf.mathFunctions.magdeg_2_reim(mag, deg)
    np.testing.assert_allclose(to_complex(values, "lin_deg"), oracle, rtol=1e-12, atol=1e-15)


def test_db_handbook_value() -> None:
    # Return loss 10 dB <-> |Gamma| = 0.31623 (Pozar, Microwave Engineering, 4th ed., ch. 2:
    # RL = -20 log10 |Gamma|); phase 90 degrees puts it on +j.
    point = to_complex(np.array([-10.0, 90.0]), "db_deg")[0]
    assert abs(point) == pytest.approx(0.31623, abs=5e-6)
    assert point.real == pytest.approx(0.0, abs=1e-15)


@pytest.mark.parametrize("layout", ["re_im", "db_deg", "lin_deg"])
def test_layout_round_trip(layout: str) -> None:
    points = np.array([0.5 + 0.5j, -0.1 + 0.0j, 0.001 - 0.9j])
    np.testing.assert_allclose(to_complex(from_complex(points, layout), layout), points, atol=1e-14)


def test_layout_writes_into_a_strided_column() -> None:
    out = np.zeros((3, 2), dtype=np.complex128)
    to_complex(np.array([1.0, 2.0, 3.0, 4.0, 5.0, 6.0]), "re_im", out=out[:, 1])
    assert out[:, 1].tolist() == [1 + 2j, 3 + 4j, 5 + 6j] and not out[:, 0].any()


def test_layout_errors() -> None:
    with pytest.raises(ValueError, match="unknown layout"):
        to_complex(np.zeros(4), "polar")
    with pytest.raises(ValueError, match="pairs"):
        to_complex(np.zeros(3), "re_im")
