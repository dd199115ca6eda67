"""Trace data as CSV for a spreadsheet: frequency plus chosen quantities of chosen
parameters, one row per sweep point.

Columns are named ``frequency_hz`` then ``<param>_<quantity>`` with the unit in the
name (``S11_db``, ``S11_phase_deg``, ``S11_swr``, ``S21_group_delay_s``). Numbers use a
decimal point and 10 significant digits; values that cannot be computed are empty.
SWR, return loss and R/X exist for reflections (Sii) only.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np

from acquire.errors import ConfigError
from acquire.metrics import conversions as cv
from acquire.sweep import Sweep

# name -> (column suffix, reflection only, computation from (f, s, z0))
Column = tuple[str, bool, Callable[[np.ndarray, np.ndarray, float], np.ndarray]]
EXPORT_QUANTITIES: dict[str, Column] = {
    "db": ("db", False, lambda f, s, z0: cv.db20(s)),
    "phase": ("phase_deg", False, lambda f, s, z0: cv.phase_deg(s)),
    "real": ("real", False, lambda f, s, z0: s.real),
    "imag": ("imag", False, lambda f, s, z0: s.imag),
    "group-delay": ("group_delay_s", False, lambda f, s, z0: cv.group_delay_s(f, s)),
    "swr": ("swr", True, lambda f, s, z0: cv.swr(s)),
    "return-loss": ("return_loss_db", True, lambda f, s, z0: cv.return_loss_db(s)),
    "r": ("r_ohm", True, lambda f, s, z0: cv.impedance(s, z0).real),
    "x": ("x_ohm", True, lambda f, s, z0: cv.impedance(s, z0).imag),
}
DEFAULT_QUANTITIES = ("db", "phase")


def all_parameters(sweep: Sweep) -> list[str]:
    """S11, S12, ..., in Touchstone order (row by row)."""
    n = sweep.ports
    return [f"S{i + 1}{j + 1}" for i in range(n) for j in range(n)]


def trace_columns(sweep: Sweep, params: Sequence[str] = (),
                  quantities: Sequence[str] = DEFAULT_QUANTITIES) -> dict[str, np.ndarray]:
    """Column name -> values; a quantity for reflections only is left out for a
    transmission, and asking for it where no chosen parameter is a reflection is an error."""
    names = [p.upper() for p in params] or all_parameters(sweep)
    for p in names:
        if p not in all_parameters(sweep):
            raise ConfigError(f"export: the sweep has no {p} (it has "
                              f"{', '.join(all_parameters(sweep))})")
    for q in quantities:
        if q not in EXPORT_QUANTITIES:
            raise ConfigError(f"export: unknown quantity {q!r}; use one of "
                              f"{', '.join(EXPORT_QUANTITIES)}")
        if EXPORT_QUANTITIES[q][1] and not any(p[1] == p[2] for p in names):
            raise ConfigError(f"export: {q} is for reflections (S11, S22), not "
                              f"{', '.join(names)}")
    f = sweep.freq_hz
    columns: dict[str, np.ndarray] = {"frequency_hz": f}
    for p in names:
        s = sweep.param(p)
        z0 = sweep.z0[int(p[1]) - 1]
        for q in quantities:
            suffix, reflection_only, compute = EXPORT_QUANTITIES[q]
            if reflection_only and p[1] != p[2]:
                continue
            with np.errstate(all="ignore"):
                columns[f"{p}_{suffix}"] = np.asarray(compute(f, s, z0), dtype=np.float64)
    return columns


def to_csv(columns: dict[str, np.ndarray]) -> str:
    """The columns as CSV text (header row, then one row per point, LF line ends)."""
    names = list(columns)
    rows = [",".join(names)]
    data = np.column_stack([columns[n] for n in names])
    for row in data:
        rows.append(",".join(f"{v:.10g}" if np.isfinite(v) else "" for v in row))
    return "\n".join(rows) + "\n"
