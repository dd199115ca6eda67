"""Per-metric statistics and process capability (Ppk, Cpk).

Mean, sample standard deviation (n − 1 in the denominator), minimum and maximum, and two
capability indices against the specification limits that apply, both of the form

    (USL − μ) / (3σ),   (μ − LSL) / (3σ),   the smaller of the two

(one-sided when only one limit exists; NIST/SEMATECH e-Handbook of Statistical Methods,
§6.1.6 "What is Process Capability?"; ISO 22514-2), differing in σ:

- **Ppk** (process performance) uses the overall sample standard deviation of all values;
- **Cpk** (process capability) uses the within-subgroup standard deviation, here the
  pooled standard deviation of the subgroups, sqrt(Σ (nᵢ − 1)·sᵢ² / Σ (nᵢ − 1)), with the
  journal's runs (a station shift, a ``measure``/``run`` call) as subgroups, and no
  unbiasing constant.

The names follow the automotive quality manuals (AIAG SPC reference manual, 2nd ed.,
ch. 4: Pp/Ppk with the total, Cp/Cpk with the within-subgroup σ; from memory). Ppk needs
two values and σ > 0; Cpk needs at least one subgroup with two values (Σ (nᵢ − 1) ≥ 1)
and a within-subgroup σ > 0; otherwise the index is reported as not available.
"""

from __future__ import annotations

from collections.abc import Hashable, Sequence
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
    ppk: float | None = None
    cpk: float | None = None
    sd_within: float | None = None
    subgroups: int = 0

    def to_dict(self) -> dict[str, Any]:
        return {"n": self.n, "mean": self.mean, "sd": self.sd, "min": self.min,
                "max": self.max, "lsl": self.lsl, "usl": self.usl, "ppk": self.ppk,
                "cpk": self.cpk, "sd_within": self.sd_within, "subgroups": self.subgroups}


def capability_index(mean: float, sd: float | None, lsl: float | None = None,
                     usl: float | None = None) -> float | None:
    """min(USL − μ, μ − LSL) / (3σ) over the limits given; None without limits or σ ≤ 0."""
    if sd is None or not sd > 0 or (lsl is None and usl is None):
        return None
    sides = []
    if usl is not None:
        sides.append((usl - mean) / (3.0 * sd))
    if lsl is not None:
        sides.append((mean - lsl) / (3.0 * sd))
    return float(min(sides))


def pooled_sd(values: np.ndarray, groups: Sequence[Hashable]) -> tuple[float | None, int]:
    """The pooled within-subgroup standard deviation and the number of subgroups."""
    by_group: dict[Hashable, list[float]] = {}
    for value, group in zip(values, groups, strict=True):
        by_group.setdefault(group, []).append(float(value))
    dof = sum(len(v) - 1 for v in by_group.values())
    if dof < 1:
        return None, len(by_group)
    squares = sum(float(np.sum((np.asarray(v) - np.mean(v)) ** 2)) for v in by_group.values())
    return float(np.sqrt(squares / dof)), len(by_group)


def describe(values: Sequence[float | None] | np.ndarray, lsl: float | None = None,
             usl: float | None = None, groups: Sequence[Hashable] | None = None) -> Stats:
    """Statistics of the finite values (NaN and None are left out); ``groups`` gives each
    value's subgroup (default: one subgroup)."""
    x = np.asarray([np.nan if v is None else v for v in values], dtype=np.float64)
    keep = np.isfinite(x)
    labels = [g for g, k in zip(groups, keep, strict=True) if k] if groups is not None \
        else [0] * int(keep.sum())
    x = x[keep]
    n = int(x.size)
    if n == 0:
        return Stats(0, None, None, None, None, lsl, usl)
    mean = float(np.mean(x))
    sd = float(np.std(x, ddof=1)) if n >= 2 else None
    within, subgroups = pooled_sd(x, labels)
    return Stats(n, mean, sd, float(np.min(x)), float(np.max(x)), lsl, usl,
                 capability_index(mean, sd, lsl, usl),
                 capability_index(mean, within, lsl, usl), within, subgroups)
