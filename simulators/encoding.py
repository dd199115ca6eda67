"""Encoders for trace replies: ASCII lists, IEEE 488.2 definite-length blocks, dB/deg pairs.

Blocks: ``#`` + one digit d + d digits of length L + L bytes (IEEE Std 488.2 §8.7.9).
REAL,32/REAL,64 are IEEE 754 values; byte order NORMal = big-endian, SWAPped =
little-endian (SCPI-1999 Vol. 2, FORMat:BORDer).
"""

from __future__ import annotations

import numpy as np


def interleaved(values: np.ndarray) -> np.ndarray:
    """Complex (n,) → float64 (2n,) as re, im per point."""
    return np.ascontiguousarray(values, dtype=np.complex128).view(np.float64)


def ascii_list(numbers: np.ndarray) -> bytes:
    """Comma-separated shortest round-trip decimal text."""
    return ",".join(map(repr, np.asarray(numbers, dtype=np.float64).tolist())).encode("ascii")


def block(payload: bytes) -> bytes:
    """Wrap bytes in a definite-length block header."""
    length = str(len(payload))
    if len(length) > 9:
        raise ValueError("block too long for a definite-length header")
    return b"#" + str(len(length)).encode() + length.encode() + payload


def real_block(numbers: np.ndarray, width: int, big_endian: bool) -> bytes:
    """REAL,32 or REAL,64 values in a definite-length block."""
    dtype = np.dtype(f"{'>' if big_endian else '<'}f{width // 8}")
    return block(np.asarray(numbers).astype(dtype, copy=False).tobytes())


def fixed_list(numbers: np.ndarray, decimals: int) -> bytes:
    """Comma-separated fixed-point text with ``decimals`` digits."""
    fmt = f"{{:.{decimals}f}}".format
    return ",".join(map(fmt, np.asarray(numbers, dtype=np.float64).tolist())).encode("ascii")


def db_deg_pairs(values: np.ndarray) -> bytes:
    """Complex (n,) → ``dB,deg,dB,deg,…``: 20·log10|x| (floored at −300 dB) and angle."""
    mag = np.maximum(np.abs(values), 1e-15)
    pairs = np.empty(2 * values.shape[0], dtype=np.float64)
    pairs[0::2] = 20.0 * np.log10(mag)
    pairs[1::2] = np.degrees(np.angle(values))
    return fixed_list(pairs, 6)
