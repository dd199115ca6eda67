"""The inputs of the uncertainty budget: what may be wrong, and by how much.

Each input is stated the way a site knows it, with the distribution the propagation and
the Monte Carlo both assume (JCGM 100:2008, GUM, 4.3.7 for bounds taken as rectangular):

- ``load_error``: bound of |Γ_actual − Γ_model| of the load standard; uniform over the
  disc of that radius, so each of its real and imaginary parts has u = r/2.
- ``phase_error_deg``: ± bound of the open's and the short's phase against their
  models, rectangular (u = a/√3), independent for the two standards.
- ``magnitude_error``: ± bound of their relative magnitude error, rectangular.
- ``repeatability``: RMS |ΔΓ| of one reconnection (the standard deviation of the complex
  reading over repeated connect/disconnect, site data); applies to each standard during
  the calibration and to the device. Normal, circular.
- ``noise``: RMS |ΔΓ| of trace noise at the reference plane, one value or one per
  point (estimated from the calibration's two readings of the load, see
  ``noise_from_repeat``, or from its one reading for older cal sets, see
  ``noise_from_load``, which can overstate it on coarse sweeps of long cables);
  applies to every reading. Normal, circular.
- ``drift_per_hour`` × the calibration's age: RMS |ΔΓ| of drift since the calibration
  (site data, e.g. from the soak history). Normal, circular.
- ``thru_error``: ± bound of the thru's relative |S21| against its model (two-port
  only), rectangular; 0 by default (a flush thru is exact).

The defaults are common practice for a careful coaxial bench and illustrative only: the
load and phase figures are those of ``acquire.calibration.residual``; repeatability
0.002 (about −54 dB) and drift 0.0005 per hour are recalled orders of magnitude, not
taken from any connector's or instrument's data.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from acquire.calibration.residual import DEFAULT_LOAD_ERROR, DEFAULT_PHASE_ERROR_DEG

DEFAULT_REPEATABILITY = 0.002
DEFAULT_NOISE = 0.0005
DEFAULT_DRIFT_PER_HOUR = 0.0005
COVERAGE_FACTOR = 2.0


@dataclass(frozen=True)
class Budget:
    """Uncertainty inputs of one corrected reflection measurement (see module doc)."""

    load_error: float = DEFAULT_LOAD_ERROR
    phase_error_deg: float = DEFAULT_PHASE_ERROR_DEG
    magnitude_error: float = 0.0
    repeatability: float = DEFAULT_REPEATABILITY
    noise: float | np.ndarray = DEFAULT_NOISE
    drift_per_hour: float = DEFAULT_DRIFT_PER_HOUR
    cal_age_s: float = 0.0
    noise_source: str = "default"
    thru_error: float = 0.0  # ± relative |S21| tolerance of the thru's model (rectangular)

    @property
    def drift(self) -> float:
        """RMS |ΔΓ| of drift at the calibration's age."""
        return self.drift_per_hour * max(self.cal_age_s, 0.0) / 3600.0

    def with_noise(self, noise: float | np.ndarray, source: str) -> Budget:
        return replace(self, noise=noise, noise_source=source)

    def as_dict(self) -> dict[str, Any]:
        """JSON-able description (noise summarised by its largest value)."""
        noise = np.asarray(self.noise, np.float64)
        return {
            "load_error": self.load_error,
            "phase_error_deg": self.phase_error_deg,
            "magnitude_error": self.magnitude_error,
            "repeatability_rms": self.repeatability,
            "noise_rms_max": float(noise.max()) if noise.size else None,
            "noise_source": self.noise_source,
            "drift_per_hour_rms": self.drift_per_hour,
            "cal_age_s": self.cal_age_s,
            "drift_rms": self.drift,
            "thru_error": self.thru_error,
            "coverage_factor": COVERAGE_FACTOR,
        }


def noise_from_load(raw_load: np.ndarray, tracking: np.ndarray) -> float | None:
    """RMS trace noise at the reference plane, from the raw load reading of a calibration.

    The load's reading is smooth in frequency apart from noise, so its fourth difference
    (weights 1, −4, 6, −4, 1) keeps the noise and removes the smooth part to fourth order;
    white noise of variance σ² gives the difference variance 70·σ² (sum of the squared
    weights). The median of |d|² (robust against a few glitches) of a circular normal
    variable is its mean times ln 2. Referred to the reference plane through |tracking|.
    Needs at least 12 points; None otherwise.
    """
    r = np.asarray(raw_load, np.complex128)
    if r.size < 12:
        return None
    d = r[:-4] - 4 * r[1:-3] + 6 * r[2:-2] - 4 * r[3:-1] + r[4:]
    mean_sq = float(np.median(np.abs(d) ** 2)) / np.log(2.0)
    t = np.abs(np.asarray(tracking, np.complex128))
    return float(np.sqrt(mean_sq / 70.0) / np.median(t))


def noise_from_repeat(first: np.ndarray, second: np.ndarray, tracking: np.ndarray
                      ) -> float | None:
    """RMS trace noise at the reference plane, from two readings of the same load taken
    one after the other without reconnecting (common practice: what repeats is the
    standard and the error box, so the difference is noise alone, whatever the trace's
    shape). Independent circular noise n in each: E|r1 − r2|² = 2·E|n|²; the median of
    |d|² of a circular normal d is its mean times ln 2 (robust against a few glitches).
    Referred to the reference plane through |tracking|. Needs at least 2 points.
    """
    d = np.asarray(first, np.complex128) - np.asarray(second, np.complex128)
    if d.size < 2:
        return None
    mean_sq = float(np.median(np.abs(d) ** 2)) / np.log(2.0)
    t = np.abs(np.asarray(tracking, np.complex128))
    return float(np.sqrt(mean_sq / 2.0) / np.median(t))


def scale_noise(noise: float, *, cal_if_hz: float, if_hz: float, cal_power_dbm: float,
                power_dbm: float, cal_averaging: int = 1, averaging: int = 1) -> float:
    """Noise measured at the calibration's stimulus, moved to the sweep's.

    Receiver noise relative to the test signal grows as √(IF bandwidth), falls as the
    source power rises (amplitude ∝ 10^(−P/20)) and falls as 1/√(averages) (common
    practice: a thermal noise floor, white within the IF bandwidth).
    """
    ratio = np.sqrt(if_hz / cal_if_hz) * 10 ** (-(power_dbm - cal_power_dbm) / 20)
    return float(noise * ratio * np.sqrt(cal_averaging / max(averaging, 1)))
