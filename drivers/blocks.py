"""IEEE 488.2 arbitrary blocks and SCPI value lists: pure encode/decode functions.

A definite-length block is ``#`` + one digit d (1-9) + d digits giving the payload length
L + exactly L bytes; an indefinite block is ``#0`` + bytes ended only by the message
terminator (IEEE Std 488.2, arbitrary block response data; clauses 8.7.9 and 8.7.10 from
memory). Binary payloads hold IEEE 754 values, ``REAL,32`` or ``REAL,64``, most
significant byte first for ``FORMat:BORDer NORMal`` (big-endian) and least significant
first for ``SWAPped`` (SCPI-1999 Vol. 2, FORMat).

Every failure raises ``BlockError`` with one line that quotes the first bytes at fault.
Non-finite values and the SCPI sentinels NAN = 9.91E37, INF = 9.9E37, NINF = -9.9E37
(SCPI-1999 Vol. 1, special numeric values) are refused: they never reach a sweep as
numbers.
"""

from __future__ import annotations

from typing import Literal

import numpy as np

from drivers.errors import BlockError

Encoding = Literal["ascii", "real32", "real64"]
ByteOrder = Literal["big", "little"]

ENCODINGS: tuple[str, ...] = ("ascii", "real32", "real64")
BYTE_ORDERS: tuple[str, ...] = ("big", "little")
VALUE_SIZE = {"real32": 4, "real64": 8}

# |x| at or above this is a SCPI sentinel (9.9E37 and 9.91E37), with room for the float32
# rounding of 9.9E37 (9.8999997E37).
SENTINEL_MIN = 9.89e37
QUOTE_BYTES = 24
# Longest vector checked with a dot product; OpenBLAS keeps dot single-threaded well
# beyond this (from memory: up to 10,000 elements), measured here up to 32,768.
DOT_MAX = 8192


def quote(data: bytes | bytearray | memoryview, limit: int = QUOTE_BYTES) -> str:
    """``b'...'`` text for the first ``limit`` bytes of ``data`` (for messages)."""
    head = bytes(data[:limit])
    more = "..." if len(data) > limit else ""
    return f"{head!r}{more}"


def dtype_for(encoding: str, byte_order: str) -> np.dtype:
    """The numpy dtype of one binary value: ``real64`` + ``big`` -> ``>f8``."""
    if encoding not in VALUE_SIZE:
        raise ValueError(f"not a binary encoding: {encoding!r}")
    if byte_order not in BYTE_ORDERS:
        raise ValueError(f"byte order must be 'big' or 'little', got {byte_order!r}")
    return np.dtype(("<" if byte_order == "little" else ">") + f"f{VALUE_SIZE[encoding]}")


def parse_header(data: bytes | bytearray | memoryview) -> tuple[int, int | None]:
    """Parse a block header at the start of ``data``.

    Returns ``(header_length, payload_length)``; ``payload_length`` is ``None`` for an
    indefinite ``#0`` block. ``data`` must hold at least the whole header.
    """
    if len(data) < 2 or data[0] != 0x23:  # '#'
        raise BlockError(f"reply is not an IEEE 488.2 block: starts {quote(data)}")
    digit = data[1]
    if not 0x30 <= digit <= 0x39:
        raise BlockError(
            f"block header needs a digit after '#', got {bytes([digit])!r}: starts {quote(data)}"
        )
    ndigits = digit - 0x30
    if ndigits == 0:
        return 2, None
    if len(data) < 2 + ndigits:
        raise BlockError(
            f"block header announces {ndigits} length digits but holds {len(data) - 2}: "
            f"starts {quote(data)}"
        )
    field = bytes(data[2 : 2 + ndigits])
    if not field.isdigit():
        raise BlockError(
            f"block length field {field!r} is not {ndigits} digits: starts {quote(data)}"
        )
    return 2 + ndigits, int(field)


def header_size_for(payload_length: int) -> int:
    """Length of the definite-length header that announces ``payload_length`` bytes."""
    return 2 + len(str(payload_length))


def encode_header(payload_length: int) -> bytes:
    """``#<d><L>`` for a payload of ``payload_length`` bytes."""
    digits = str(payload_length)
    if len(digits) > 9:
        raise ValueError(f"payload of {payload_length} bytes does not fit a definite block")
    return f"#{len(digits)}{digits}".encode("ascii")


def split_block(reply: bytes | bytearray | memoryview, terminator: bytes = b"") -> memoryview:
    """The payload of one complete block reply, without header and terminator.

    A definite block must be followed by exactly ``terminator`` (or nothing when it is
    empty); for an indefinite block the payload is everything up to the terminator.
    """
    view = memoryview(reply)
    start, length = parse_header(view)
    if length is None:
        end = len(view) - len(terminator)
        if terminator and bytes(view[end:]) != terminator:
            raise BlockError(
                f"indefinite block does not end with {terminator!r}: starts {quote(view)}"
            )
        return view[start:end]
    have = len(view) - start
    if have < length:
        raise BlockError(
            f"block truncated: header announces {length} bytes, got {have}: starts {quote(view)}"
        )
    tail = bytes(view[start + length :])
    if tail != terminator:
        raise BlockError(
            f"block of {length} bytes is followed by {quote(tail)}, expected {terminator!r}"
        )
    return view[start : start + length]


def encode_block(
    values: np.ndarray, encoding: str, byte_order: str = "big", *, indefinite: bool = False
) -> bytes:
    """A block (or an ASCII list for ``ascii``) holding ``values``; no terminator."""
    values = np.asarray(values, dtype=np.float64).ravel()
    if encoding == "ascii":
        return ",".join(repr(float(v)) for v in values).encode("ascii")
    payload = values.astype(dtype_for(encoding, byte_order)).tobytes()
    return (b"#0" if indefinite else encode_header(len(payload))) + payload


def expect_length(length: int, count: int, encoding: str, what: str = "") -> None:
    """Check a payload of ``length`` bytes holds exactly ``count`` values of ``encoding``."""
    size = VALUE_SIZE[encoding]
    if length != count * size:
        held = f"{length / size:g} values" if length % size == 0 else "not a whole number of values"
        raise BlockError(
            f"block holds {length} bytes ({held}), expected {count * size} = "
            f"{what or f'{count} values'} x {size} bytes"
        )


def decode_binary(
    payload: bytes | bytearray | memoryview,
    encoding: str,
    byte_order: str,
    count: int,
    what: str = "",
) -> np.ndarray:
    """``count`` finite float64 values from a binary payload (checked length)."""
    expect_length(len(payload), count, encoding, what)
    raw = np.frombuffer(payload, dtype=dtype_for(encoding, byte_order), count=count)
    values = raw.astype(np.float64)  # always a copy: the payload buffer may be reused
    check_finite(values, payload)
    return values


def decode_ascii(
    text: bytes | bytearray | memoryview | str, count: int | None, what: str = ""
) -> np.ndarray:
    """Comma-separated numbers (SCPI ``<NRf>`` list) as finite float64 values.

    ``count`` (when given) is the exact number of values the reply must hold.
    """
    raw = text.encode("ascii", "replace") if isinstance(text, str) else bytes(text)
    body = raw.strip()
    if not body:
        tokens: list[bytes] = []
    else:
        tokens = body.split(b",")
    if count is not None and len(tokens) != count:
        raise BlockError(
            f"value list holds {len(tokens)} values, expected {what or count}: starts {quote(raw)}"
        )
    if not tokens:
        return np.empty(0, dtype=np.float64)
    try:
        values = np.array(tokens).astype(np.float64)
    except ValueError:
        bad = next(i for i, t in enumerate(tokens) if not _is_number(t))
        raise BlockError(
            f"value {bad} of the list is not a number: {quote(tokens[bad].strip())}; "
            f"list starts {quote(raw)}"
        ) from None
    check_finite(values, raw)
    return values


def check_finite(values: np.ndarray, source: bytes | bytearray | memoryview = b"") -> None:
    """Refuse NaN, infinities and the SCPI sentinels (|x| >= 9.9E37)."""
    if values.size == 0 or surely_finite(values):
        return
    flagged = np.flatnonzero(~(np.abs(values) < SENTINEL_MIN))  # NaN compares False
    if flagged.size == 0:
        return  # large but legal values tripped the quick filter
    bad = int(flagged[0])
    value = float(values[bad])
    kind = _sentinel_name(value)
    src = f"; reply starts {quote(source)}" if len(source) else ""
    raise BlockError(f"value {bad} is {kind} ({value!r}), not a measurement{src}")


def surely_finite(values: np.ndarray) -> bool:
    """True when no value is NaN, infinite or a sentinel (False: look closer).

    Short vectors: one dot product (NaN and infinities make the sum of squares
    non-finite, a sentinel makes it at least 9.8E75, S-parameters keep it far below
    1E70). Long ones: two reductions without temporaries (NaN propagates into both), so
    that no BLAS worker thread wakes up and spins on the core the sweep loop runs on.
    """
    if values.ndim == 1 and values.size <= DOT_MAX:
        return bool(values.dot(values) < 1e70)
    return bool(
        np.minimum.reduce(values, axis=None) > -SENTINEL_MIN
        and np.maximum.reduce(values, axis=None) < SENTINEL_MIN
    )


def _sentinel_name(value: float) -> str:
    if np.isnan(value):
        return "not a number"
    if np.isinf(value):
        return "infinite"
    if abs(abs(value) - 9.91e37) < 1e-4 * 9.91e37:
        return "the SCPI NAN sentinel 9.91E37"
    if abs(abs(value) - 9.9e37) < 1e-4 * 9.9e37:
        return "the SCPI INF sentinel 9.9E37" if value > 0 else "the SCPI NINF sentinel -9.9E37"
    return "out of range (|x| >= 9.9E37 is reserved for SCPI sentinels)"


def _is_number(token: bytes) -> bool:
    try:
        float(token)
    except ValueError:
        return False
    return True
