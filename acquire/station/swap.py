"""Was the unit swapped? A sweep identical within noise to the unit measured just before
(under another serial), or to the golden unit measured this shift, means the operator
scanned a new label but left the old unit on the fixture.

Two sweeps of one unit differ only by trace noise; two units differ by their spread,
which is far larger. The noise of each sweep is estimated from its second differences
(for white noise of standard deviation s per component, x[k-1] - 2 x[k] + x[k+1] has
6 s^2 per component, and its magnitude is Rayleigh distributed with median
sqrt(6) s sqrt(2 ln 2)); the median is robust against the trace's own curvature. The
sweeps count as the same unit when the rms vector difference stays within
SAME_UNIT_SIGMAS times the noise of the difference, or below SAME_UNIT_FLOOR (noise-free
data). Both limits are our choice.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from acquire.sweep import Sweep

SAME_UNIT_SIGMAS = 4.0
SAME_UNIT_FLOOR = 1e-4  # |dS| rms, -80 dB: below any unit-to-unit spread
_RAYLEIGH_MEDIAN = math.sqrt(6.0) * math.sqrt(2.0 * math.log(2.0))


def noise_sigma(s: np.ndarray) -> float:
    """Per-component noise of complex traces (points along axis 0) from second differences."""
    flat = np.asarray(s).reshape(s.shape[0], -1)
    if flat.shape[0] < 3:
        return 0.0
    d2 = flat[:-2] - 2.0 * flat[1:-1] + flat[2:]
    return float(np.median(np.abs(d2))) / _RAYLEIGH_MEDIAN


def same_unit(a: Sweep, b: Sweep) -> tuple[bool, float, float]:
    """(same within noise, rms |dS|, allowed rms) for two sweeps on one grid; a different
    grid or parameter set is never the same unit."""
    if a.s.shape != b.s.shape or not np.allclose(a.freq_hz, b.freq_hz, rtol=1e-12, atol=0.0):
        return False, math.inf, 0.0
    diff = a.s - b.s
    if not np.all(np.isfinite(diff)):
        return False, math.inf, 0.0
    rms = float(np.sqrt(np.mean(np.abs(diff) ** 2)))
    sigma = math.hypot(noise_sigma(a.s), noise_sigma(b.s))
    allowed = max(SAME_UNIT_SIGMAS * math.sqrt(2.0) * sigma, SAME_UNIT_FLOOR)
    return rms <= allowed, rms, allowed


@dataclass
class SwapGuard:
    """Remembers the last unit and the last golden sweep of a shift."""

    last_serial: str | None = None
    last_sweep: Sweep | None = None
    golden_serial: str | None = None
    golden_sweep: Sweep | None = None

    def suspect(self, serial: str, sweep: Sweep) -> str | None:
        """Why this sweep looks like a unit that was not swapped, in words; else None."""
        if self.last_sweep is not None and self.last_serial != serial:
            same, rms, _ = same_unit(sweep, self.last_sweep)
            if same:
                return (f"this sweep is identical within noise to {self.last_serial}, the unit "
                        f"measured just before (rms difference {_db(rms)})")
        if self.golden_sweep is not None and serial != self.golden_serial:
            same, rms, _ = same_unit(sweep, self.golden_sweep)
            if same:
                return (f"this sweep is identical within noise to the golden unit "
                        f"{self.golden_serial} (rms difference {_db(rms)})")
        return None

    def remember(self, serial: str, sweep: Sweep) -> None:
        self.last_serial, self.last_sweep = serial, sweep

    def remember_golden(self, serial: str, sweep: Sweep) -> None:
        self.golden_serial, self.golden_sweep = serial, sweep


def _db(rms: float) -> str:
    return "0 (identical)" if rms == 0.0 else f"{20.0 * math.log10(rms):.1f} dB"


def confirm_step(guard: SwapGuard, serial: str, say: Callable[..., None],
                 ask: Callable[[str], str | None]) -> Callable[[Any], str | None]:
    """The station's confirm step for ``measure_unit``: when the sweep looks like a unit
    that was not swapped, warn and ask; keep the capture only on a clear yes."""
    def confirm(cap: Any) -> str | None:
        why = guard.suspect(serial, cap.sweep)
        if why is None:
            return None
        say(f"WARNING: was the unit swapped? {why}.",
            f"  y = yes, this is a new unit {serial}: keep it",
            "  anything else = do not store it; put the right unit on and scan it again")
        answer = ask("swapped? y/n> ")
        if answer is not None and answer.strip().lower() in ("y", "yes"):
            return None
        say(f"{serial} was NOT stored (unit not swapped); nothing was saved for it")
        return f"the operator said the unit was not swapped: {why}"
    return confirm
