"""Vectorised parsing of the numbers in a Touchstone data section.

Two paths, both exact (every number is the correctly rounded double of its decimal text,
as ``float()`` would give):

* ``parse_records``: when every data set has the same byte layout (files written by
  sweepd, and many instrument files) the section is viewed as a ``(sets, bytes)``
  matrix, checked against the first set in a few whole-array comparisons, and the
  digits are combined eight at a time with integer arithmetic (no per-number Python).
* ``parse_tokens``: any layout; numbers are split in C and converted with ``float``.

A decimal ``M * 10**E`` becomes a double by Clinger's exact fast path (M <= 2**53,
|E| <= 22; W. D. Clinger, "How to read floating point numbers accurately", PLDI 1990),
else in x87 extended precision (64-bit significand) unless the extended result lies
within a few units of its last bit of a half-way point between two doubles, where
double rounding could go wrong; those few, and everything on platforms without
extended precision, go through Python's correctly rounded ``float``. Frequency columns
pass a decimal ``shift`` (9 for GHz) that is added to the exponent, so ``2.4500000005``
GHz becomes exactly 2450000000.5 Hz.
"""

from __future__ import annotations

import re
import sys

import numpy as np

from drivers.yamlnode import show

ALLOWED_DATA_BYTES = b"0123456789+-.eE \t\n"
_NUMBER = re.compile(rb"([+-]?)(\d*)(\.?)(\d*)(?:([eE])([+-]?)(\d+))?\Z")
_BAD_BYTE = re.compile(rb"[^0-9+\-.eE \t\n]")
_WS = (9, 10, 32)
_MAX_MANTISSA_DIGITS = 19      # 10**19 - 1 < 2**64

_POW10_EXACT = np.array([10.0**k for k in range(23)])          # exact in binary64
_EXTENDED = (np.finfo(np.longdouble).nmant == 63 and np.dtype(np.longdouble).itemsize == 16
             and sys.byteorder == "little")
_MAX_EXPONENT = 350
if _EXTENDED:
    # Exact up to 10**27; beyond, correctly rounded by the C library's strtold.
    _POW10_LD = np.array([np.longdouble(f"1e{k}") for k in range(_MAX_EXPONENT + 1)])


class NumberError(ValueError):
    """A bad number; ``line`` is the 0-based line inside the parsed section."""

    def __init__(self, line: int, message: str) -> None:
        super().__init__(message)
        self.line = line
        self.message = message


def describe_byte(value: int) -> str:
    """``'x'`` for printable ASCII, ``byte 0xb5`` otherwise."""
    return repr(chr(value)) if 0x20 < value < 0x7F else f"byte 0x{value:02x}"


def check_charset(section: bytes) -> None:
    """Raise NumberError at the first byte that cannot be part of numeric data."""
    if section.translate(None, ALLOWED_DATA_BYTES):
        match = _BAD_BYTE.search(section)
        assert match is not None
        pos = match.start()
        line = section.count(b"\n", 0, pos)
        raise NumberError(line, f"unexpected {describe_byte(section[pos])} in numeric data")


def is_number(token: bytes) -> bool:
    """True for the decimal forms Touchstone allows: ``5``, ``-.95``, ``+1.0E+09``."""
    match = _NUMBER.match(token)
    return match is not None and bool(match.group(2) or match.group(4))


def float_shifted(token: bytes, shift: int) -> float:
    """float(token) * 10**shift, correctly rounded, by moving the decimal exponent."""
    if not shift:
        return float(token)
    mantissa, _, exponent = token.lower().partition(b"e")
    return float(mantissa + b"e" + str(int(exponent or b"0") + shift).encode())


def decimal_to_float(mantissa: np.ndarray, exponent: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Correctly rounded doubles of ``mantissa * 10**exponent`` where it can be done in numpy.

    ``mantissa`` is uint64, ``exponent`` int64. Returns ``(values, unresolved)``: the
    values are exact where ``unresolved`` is false; the caller converts the rest with
    :func:`float_shifted`.
    """
    values = mantissa.astype(np.float64)
    values /= _POW10_EXACT[np.clip(-exponent, 0, 22)]       # exact: one rounding each,
    values *= _POW10_EXACT[np.clip(exponent, 0, 22)]        # and one of them is 1.0
    abs_e = np.abs(exponent)
    slow = (mantissa > np.uint64(2**53)) | (abs_e > 22)
    slow &= mantissa != 0
    if not slow.any():
        return values, slow
    unresolved = slow.copy()
    if _EXTENDED:
        # 64-bit significands hold M exactly; the result is within 2 units of its last
        # bit (one rounding, plus one in 10**k beyond 10**27). Rounding it to double is
        # then exact unless it lies that close to a half-way point between two doubles.
        ext = slow & (abs_e <= _MAX_EXPONENT)
        m = mantissa[ext].astype(np.longdouble)
        e = exponent[ext]
        p = _POW10_LD[np.abs(e)]
        wide = np.where(e >= 0, m * p, m / p)
        with np.errstate(over="ignore", under="ignore"):
            narrow = wide.astype(np.float64)
        low_bits = wide.view(np.uint64)[0::2] & np.uint64(0x7FF)
        near_half = (low_bits >= np.uint64(0x400 - 3)) & (low_bits <= np.uint64(0x400 + 3))
        odd_range = ~np.isfinite(narrow) | (np.abs(narrow) < np.finfo(np.float64).tiny)
        values[ext] = narrow
        unresolved[ext] = near_half | odd_range
    return values, unresolved


def _swar8(words: np.ndarray) -> np.ndarray:
    """Value of eight ASCII digits packed little-endian in each uint64, in place.

    The first digit sits in the lowest byte; pairs, then quads, then the eight are
    combined with one multiply each (the usual SWAR digit-parsing steps).
    """
    for mask, factor, shift in ((0x0F0F0F0F0F0F0F0F, 2561, 8),
                                (0x00FF00FF00FF00FF, 6553601, 16),
                                (0x0000FFFF0000FFFF, 42949672960001, 32)):
        words &= np.uint64(mask)
        words *= np.uint64(factor)
        words >>= np.uint64(shift)
    return words


class _Field:
    """Byte positions of one number inside a data-set record (from the first record)."""

    def __init__(self, start: int, end: int, match: re.Match[bytes], sign_slot: int | None):
        self.start, self.end = start, end
        _, whole, point, frac, e, esign, edigits = (match.span(i) for i in range(1, 8))
        self.sign_slot = sign_slot
        self.whole = (start + whole[0], start + whole[1])
        self.frac = (start + frac[0], start + frac[1]) if point[1] > point[0] else (0, 0)
        self.esign = start + esign[0] if esign[1] > esign[0] else None
        self.edigits = (start + edigits[0], start + edigits[1]) if e[0] >= 0 else None
        self.frac_len = self.frac[1] - self.frac[0]

    @property
    def anchor(self) -> int:
        """First byte of the field: its sign slot, else its first integer digit."""
        return self.sign_slot if self.sign_slot is not None else self.whole[0]

    @property
    def digits(self) -> int:
        return self.whole[1] - self.whole[0] + self.frac_len


def _record_fields(template: bytes, rows: np.ndarray) -> list[_Field] | None:
    """Fields of the first record, or None if some token is not a plain number.

    A number that begins a line may extend left over columns that are blank in the
    first record but hold digits in others (right-aligned columns such as
    ``  915000000`` / ``2450000000``); such blanks read as leading zeros.
    """
    fields = []
    for tok in re.finditer(rb"[^ \t\n]+", template):
        if not is_number(tok.group()):
            return None
        match = _NUMBER.match(tok.group())
        assert match is not None
        start, has_sign = tok.start(), bool(match.group(1))
        field = _Field(start, tok.end(), match, None)
        line_start = template.rfind(b"\n", 0, start) + 1
        if not has_sign and start > line_start and not template[line_start:start].strip():
            blank = rows[:, line_start:field.whole[0]]
            digit_cols = np.flatnonzero(((blank - np.uint8(48)) < 10).any(axis=0))
            if digit_cols.size:
                field.whole = (line_start + int(digit_cols[0]), field.whole[1])
        slot = start if has_sign else field.whole[0] - 1
        before = template[slot - 1] if slot >= 1 else 10
        if slot >= 0 and template[slot] in b" +-" and before in _WS:
            field.sign_slot = slot
        elif has_sign:
            return None
        if field.digits > _MAX_MANTISSA_DIGITS or (
            field.edigits and field.edigits[1] - field.edigits[0] > 8
        ):
            return None
        fields.append(field)
    return fields


def _groups(fields: list[_Field]) -> list[tuple[int, int, int]]:
    """Runs of equally spaced fields with the same shape: (first index, count, stride)."""
    def shape(f: _Field) -> tuple:
        at = f.anchor
        marks = (f.whole, f.frac, (f.end, f.esign if f.esign is not None else at),
                 f.edigits or (at, at))
        return (f.sign_slot is None, f.esign is None, f.edigits is None, f.frac_len > 0,
                *(p - at for pair in marks for p in pair))
    runs: list[tuple[int, int, int]] = []
    k = 0
    while k < len(fields):
        count, stride = 1, 0
        while k + count < len(fields) and shape(fields[k + count]) == shape(fields[k]):
            step = fields[k + count].anchor - fields[k + count - 1].anchor
            if count > 1 and step != stride:
                break
            stride, count = step, count + 1
        runs.append((k, count, stride))
        k += count
    return runs


def parse_records(buffer: bytes, offset: int, length: int, record_len: int,
                  shifts: np.ndarray) -> np.ndarray | None:
    """Numbers of equal-layout records, shape ``(records, numbers)``.

    ``buffer[offset:offset + length]`` holds whole records of ``record_len`` bytes, each
    ending in a newline; ``shifts[k]`` is the decimal shift of number k in a record.
    Every byte is checked against the first record (digits where it has digits, the
    same bytes elsewhere, signs only in sign positions), so a None result (layout
    differs) is the only way out: the caller then uses :func:`parse_tokens`, which
    also words the error messages.
    """
    if record_len <= 0 or length % record_len or buffer[offset + length - 1] != 10:
        return None
    rows = np.frombuffer(buffer, dtype=np.uint8, count=length, offset=offset)
    rows = rows.reshape(-1, record_len)
    fields = _record_fields(bytes(rows[0]), rows)
    if fields is None or len(fields) != len(shifts) or not _same_layout(rows, fields):
        return None
    count, nf = rows.shape[0], len(fields)
    words = -(-max(f.digits for f in fields) // 8)
    digits = np.full((count, nf, 8 * words), ord("0"), dtype=np.uint8)
    exponent = np.zeros((count, nf), dtype=np.int64)
    negative = np.zeros((count, nf), dtype=bool)
    for k0, g, stride in _groups(fields):
        f = fields[k0]
        base = f.anchor
        view = np.lib.stride_tricks.as_strided(
            rows[:, base:], shape=(count, g, f.end - base), strides=(record_len, stride, 1),
            writeable=False)
        at = slice(k0, k0 + g)

        def cols(a: int, b: int, view: np.ndarray = view, base: int = base) -> np.ndarray:
            return view[:, :, a - base:b - base]
        end = 8 * words - f.frac_len
        digits[:, at, end - (f.whole[1] - f.whole[0]):end] = cols(*f.whole)
        if f.frac_len:
            digits[:, at, end:] = cols(*f.frac)
        if f.edigits:
            for pos in range(*f.edigits):
                exponent[:, at] = exponent[:, at] * 10 + (cols(pos, pos + 1)[..., 0] - 48)
            if f.esign is not None:
                exponent[:, at] *= 1 - 2 * (cols(f.esign, f.esign + 1)[..., 0] == 45)
        if f.sign_slot is not None:
            negative[:, at] = cols(f.sign_slot, f.sign_slot + 1)[..., 0] == 45
    parts = _swar8(digits.view("<u8"))      # a blank (0x20) counts as a leading zero
    mantissa = parts[..., 0]
    for w in range(1, words):
        mantissa = mantissa * np.uint64(10**8) + parts[..., w]
    frac_len = np.array([f.frac_len for f in fields], dtype=np.int64)
    exponent += np.asarray(shifts, dtype=np.int64) - frac_len
    values, unresolved = decimal_to_float(mantissa, exponent)
    for r, k in np.argwhere(unresolved):
        f = fields[k]
        token = bytes(rows[r, f.whole[0]:f.end]).strip()
        values[r, k] = abs(float_shifted(token, int(shifts[k])))
    if not np.isfinite(values).all():
        return None                          # out of range: let parse_tokens say where
    values *= 1.0 - 2.0 * negative           # keeps -0.0
    return values


def _same_layout(rows: np.ndarray, fields: list[_Field]) -> bool:
    """True when every record matches the first one byte class by byte class.

    Where the first record has a digit every record must have one; elsewhere the bytes
    must be equal, except sign positions (blank, + or -), exponent signs (+ or -) and
    the blank leading columns of right-aligned numbers (blank or digit, digits
    contiguous and ending in a digit).
    """
    template = rows[0].copy()
    digit = (template - np.uint8(48)) < 10
    free = np.zeros(rows.shape[1], dtype=bool)
    slots = [f.sign_slot for f in fields if f.sign_slot is not None]
    esigns = [f.esign for f in fields if f.esign is not None]
    free[slots] = True
    free[esigns] = True
    lead = [(f.whole[0], f.whole[1]) for f in fields if not digit[f.whole[0]:f.whole[1]].all()]
    for a, b in lead:
        free[a:b] = True
    fixed_mask = np.where(~digit & ~free, np.uint8(0xFF), np.uint8(0))
    digit_mask = np.where(digit & ~free, np.uint8(0xFF), np.uint8(0))
    scratch = np.bitwise_xor(rows, template)
    np.bitwise_and(scratch, fixed_mask, out=scratch)
    if scratch.any():
        return False
    np.subtract(rows, np.uint8(48), out=scratch)
    np.bitwise_and(scratch, digit_mask, out=scratch)
    if scratch.max() > 9:
        return False
    for a, b in lead:
        span = rows[:, a:b]
        is_digit = (span - np.uint8(48)) < 10
        if not (is_digit | (span == 32)).all() or not is_digit[:, -1].all():
            return False
        if not (is_digit[:, 1:] >= is_digit[:, :-1]).all():
            return False
    if slots:
        s = rows[:, slots]
        if not ((s == 32) | (s == 43) | (s == 45)).all():
            return False
    if esigns:
        s = rows[:, esigns]
        if not ((s == 43) | (s == 45)).all():
            return False
    return True


def tokens_with_lines(section: bytes) -> tuple[list[bytes], np.ndarray]:
    """Whitespace-separated tokens and the 0-based line of each (section is charset-checked)."""
    tokens = section.split()
    raw = np.frombuffer(section, dtype=np.uint8)
    if not tokens:
        return tokens, np.zeros(0, dtype=np.int64)
    ws = raw <= 32
    starts = np.flatnonzero(~ws & np.concatenate(([True], ws[:-1])))
    newlines = np.flatnonzero(raw == 10)
    return tokens, np.searchsorted(newlines, starts)


def parse_tokens(tokens: list[bytes], lines: np.ndarray) -> np.ndarray:
    """Convert tokens with ``float``; a malformed or overflowing one raises NumberError."""
    try:
        values = np.array(list(map(float, tokens)), dtype=np.float64)
    except ValueError:
        values = None
    if values is not None and np.isfinite(values).all():
        return values
    for k, tok in enumerate(tokens):
        if not is_number(tok):
            raise NumberError(int(lines[k]), f"{show(tok.decode('ascii'))} is not a number")
        if not np.isfinite(float(tok)):
            raise NumberError(int(lines[k]), f"{show(tok.decode('ascii'))} is out of range")
    raise AssertionError("unreachable: float() failed but every token is valid")
