"""Per-metric statistics and process capability.

Mean, sample standard deviation (n − 1 in the denominator), minimum and maximum, and the
process capability index against the specification limits that apply:

    Cpu = (USL − μ) / (3σ),   Cpl = (μ − LSL) / (3σ),   Cpk = min(Cpu, Cpl)

with only the one-sided index when only one limit exists (NIST/SEMATECH e-Handbook of
Statistical Methods, §6.1.6 "What is Process Capability?"; ISO 22514-2). σ is the
sample standard deviation of all values (the overall, long-term estimate). Cpk needs at
least two values and σ > 0; otherwise it is reported as not available.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np


@dataclass(frozen=True)
class Stats:
    n: int
    mean: float | None
    sd: float | None
    min: float | None
    max: float | None
    lsl: float | None = None
    usl: float | None = None
    cpk: float | None = None

    def to_dict(self) -> dict[str, Any]:
        return {"n": self.n, "mean": self.mean, "sd": self.sd, "min": self.min,
                "max": self.max, "lsl": self.lsl, "usl": self.usl, "cpk": self.cpk}


def cpk(mean: float, sd: float, lsl: float | None = None, usl: float | None = None
        ) -> float | None:
    """min(USL − μ, μ − LSL) / (3σ) over the limits given; None without limits or σ ≤ 0."""
    if not sd > 0 or (lsl is None and usl is None):
        return None
    sides = []
    if usl is not None:
        sides.append((usl - mean) / (3.0 * sd))
    if lsl is not None:
        sides.append((mean - lsl) / (3.0 * sd))
    return float(min(sides))


def describe(values: Sequence[float] | np.ndarray, lsl: float | None = None,
             usl: float | None = None) -> Stats:
    """Statistics of the finite values (NaN and None are left out)."""
    x = np.asarray([np.nan if v is None else v for v in values], dtype=np.float64)
    x = x[np.isfinite(x)]
    n = int(x.size)
    if n == 0:
        return Stats(0, None, None, None, None, lsl, usl, None)
    mean = float(np.mean(x))
    sd = float(np.std(x, ddof=1)) if n >= 2 else None
    index = cpk(mean, sd, lsl, usl) if sd is not None else None
    return Stats(n, mean, sd, float(np.min(x)), float(np.max(x)), lsl, usl, index)
