"""Size limits for reading Touchstone files (README "Limits and guarantees").

Checked before the matching memory is allocated: a ``.s99999p`` name or
``[Number of Ports] 100000`` would otherwise ask for a matrix of hundreds of GiB.
"""

from __future__ import annotations

import numpy as np

MAX_PORTS = 64
MAX_FREQUENCIES = 1_000_000
MAX_NUMBERS = 10_000_000  # e.g. 1,000,000 frequencies of a 2-port file (9 numbers each)
MAX_FILE_BYTES = 256 * 1024 * 1024
_CHUNK = 16 * 1024 * 1024


def count_numbers(data: bytes, start: int, end: int) -> int:
    """Whitespace-separated tokens in ``data[start:end]``, counted without splitting."""
    total = 0
    previous_blank = True
    for at in range(start, end, _CHUNK):
        size = min(_CHUNK, end - at)
        raw = np.frombuffer(data, dtype=np.uint8, count=size, offset=at)
        blank = raw <= 32
        before = np.empty_like(blank)
        before[0] = previous_blank
        before[1:] = blank[:-1]
        total += int(np.count_nonzero(~blank & before))
        previous_blank = bool(blank[-1])
    return total


def ports_problem(ports: int) -> str | None:
    """Why ``ports`` cannot be read, or None."""
    if ports > MAX_PORTS:
        return f"{ports} ports: sweepd reads at most {MAX_PORTS}"
    return None
