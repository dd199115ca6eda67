"""Vectorised fixed-width decimal formatting of float64 arrays.

Python formats one number at a time, which makes it the bottleneck of a Touchstone
writer. Here every number of a sweep is turned into ASCII bytes with a handful of numpy
operations: decimal exponent from ``log10``, an integer mantissa scaled by an exactly
rounded power of ten, and digits looked up four at a time from a table. The output is a
``(count, width)`` uint8 array of equal-width fields such as ``-1.234567890123e-05``
(scientific) or `` 2.450000000`` (frequencies), ready to be dropped into a byte matrix.
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np

#: Most significant digits the vectorised path can produce exactly (10**15 < 2**53).
MAX_FAST_DIGITS = 15

_GROUP = np.array([f"{i:04d}" for i in range(10_000)], dtype="S4").view("<u4")
_POW_MIN, _POW_MAX = -180, 180
# Correctly rounded powers of ten (Fraction avoids the 1-ulp error of 10.0 ** -k).
_POW10 = np.array([float(Fraction(10) ** k) for k in range(_POW_MIN, _POW_MAX + 1)])
_SPACE, _MINUS, _PLUS, _POINT, _ZERO, _E = (np.uint8(ord(c)) for c in " -+.0e")


def pow10(k: np.ndarray) -> np.ndarray:
    """10.0 ** k for integer arrays with |k| <= 180, each correctly rounded."""
    return _POW10[k - _POW_MIN]


def scale_by_pow10(a: np.ndarray, k: np.ndarray) -> np.ndarray:
    """a * 10**k without overflow for |k| up to 360 (one or two exactly rounded factors)."""
    if k.size == 0 or (k.min() >= _POW_MIN and k.max() <= _POW_MAX):
        return a * pow10(k)
    half = k >> 1
    return (a * pow10(half)) * pow10(k - half)


def digit_bytes(values: np.ndarray, ndigits: int) -> np.ndarray:
    """Non-negative int64 values below 10**16 as zero-padded ASCII digits, (m, ndigits)."""
    groups = -(-ndigits // 4)
    words = np.empty((values.size, groups), dtype="<u4")
    rest = values.astype(np.int64, copy=True)
    for g in range(groups - 1, -1, -1):
        rest, low = np.divmod(rest, 10_000)
        words[:, g] = _GROUP[low]
    return words.view(np.uint8).reshape(values.size, 4 * groups)[:, 4 * groups - ndigits:]


def decimal_exponents(a: np.ndarray, digits: int) -> tuple[np.ndarray, np.ndarray]:
    """Exponent e and integer mantissa m with a ~= m * 10**(e - digits + 1).

    ``a`` holds finite non-negative numbers; zeros give m = 0, e = 0. ``m`` lies in
    [10**(digits-1), 10**digits) otherwise, rounded to nearest.
    """
    nonzero = a > 0
    safe = np.where(nonzero, a, 1.0)
    e = np.floor(np.log10(safe)).astype(np.int64)
    m = np.rint(scale_by_pow10(safe, digits - 1 - e))
    # log10 can be one off next to powers of ten; the rounded mantissa tells.
    high = m >= 10.0**digits
    low = m < 10.0 ** (digits - 1)
    if high.any() or low.any():
        e = e + high - low
        m = np.rint(scale_by_pow10(safe, digits - 1 - e))
        carry = m >= 10.0**digits
        e = e + carry
        m = np.where(carry, 10.0 ** (digits - 1), m)
    m = np.where(nonzero, m, 0.0).astype(np.int64)
    e = np.where(nonzero, e, 0)
    return e, m


def scientific_width(digits: int, exp_digits: int) -> int:
    """Width of a field from :func:`scientific_fields` (sign slot included)."""
    return 1 + digits + (1 if digits > 1 else 0) + 2 + exp_digits


def scientific_fields(x: np.ndarray, digits: int, exp_digits: int | None = None) -> np.ndarray:
    """Format finite floats as ``-d.ddd...e+XX`` with ``digits`` significant digits.

    Returns a ``(x.size, width)`` uint8 array; the first byte is ``-`` or a space, so a
    field preceded by one separator space stays readable and splits cleanly. The
    exponent takes two digits unless some value needs three (or ``exp_digits`` says).
    The value printed is within half a unit in the last digit plus a few parts in 1e16.
    """
    if not 1 <= digits <= MAX_FAST_DIGITS:
        raise ValueError(f"digits must be 1..{MAX_FAST_DIGITS}, got {digits}")
    flat = np.asarray(x, dtype=np.float64).ravel()
    e, m = decimal_exponents(np.abs(flat), digits)
    if exp_digits is None:
        exp_digits = 3 if flat.size and np.abs(e).max() >= 100 else 2
    width = scientific_width(digits, exp_digits)
    out = np.empty((flat.size, width), dtype=np.uint8)
    out[:, 0] = np.where(np.signbit(flat), _MINUS, _SPACE)
    mant = digit_bytes(m, digits)
    out[:, 1] = mant[:, 0]
    col = 2
    if digits > 1:
        out[:, 2] = _POINT
        out[:, 3:2 + digits] = mant[:, 1:]
        col = 2 + digits
    out[:, col] = _E
    out[:, col + 1] = np.where(e < 0, _MINUS, _PLUS)
    out[:, col + 2:] = digit_bytes(np.abs(e), exp_digits)
    return out


def fixed_point_fields(
    int_part: np.ndarray, frac_part: np.ndarray, frac_digits: int, shift: int
) -> np.ndarray:
    """Format non-negative ``int_part + frac_part / 10**frac_digits`` divided by 10**shift.

    The decimal point is moved ``shift`` places left as text, so the digits stay exact
    (``2450000001`` with shift 9 prints ``2.450000001``). Leading zeros become spaces,
    right-aligned to a common width. Returns a ``(n, width)`` uint8 array.
    """
    int_part = np.asarray(int_part, dtype=np.int64)
    top = int(int_part.max()) if int_part.size else 0
    int_digits = max(len(str(top)), shift + 1)
    if int_digits > 16:
        raise ValueError("integer part too large for fixed-point formatting")
    whole = digit_bytes(int_part, int_digits)
    lead = int_digits - shift                      # digits before the printed point
    decimals = shift + frac_digits
    width = lead + (1 + decimals if decimals else 0)
    out = np.empty((int_part.size, width), dtype=np.uint8)
    head = whole[:, :lead].copy()
    # Blank leading zeros, keeping the units digit before the point.
    if lead > 1:
        nonzero_seen = np.logical_or.accumulate(head[:, :-1] != _ZERO, axis=1)
        head[:, :-1] = np.where(nonzero_seen, head[:, :-1], _SPACE)
    out[:, :lead] = head
    if decimals:
        out[:, lead] = _POINT
        out[:, lead + 1:lead + 1 + shift] = whole[:, lead:]
        if frac_digits:
            out[:, lead + 1 + shift:] = digit_bytes(np.asarray(frac_part, np.int64), frac_digits)
    return out
