"""Drift of each sweep against the soak's reference, per point and in summary.

Per point: the change of |S| in dB, 20·log10|S| − 20·log10|S_ref|, and the change of
phase, ∠(S · conj S_ref) in degrees (wrapped to ±180°). Per sweep: the largest absolute
change and the root mean square of each, the resonance (minimum |Γ| refined by a
parabola, Pozar ch. 6 / ``acquire.metrics.resonance_min_gamma``) and its shift from the
reference's, and the worst SWR in the band with its rise over the reference's
(SWR = (1 + |Γ|)/(1 − |Γ|), Pozar ch. 2). Resonance and SWR exist only for a
reflection parameter. Everything is vectorised over points.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from acquire.errors import PlanError
from acquire.jsonclean import finite_or_none
from acquire.metrics import db20, resonance_min_gamma, swr
from acquire.sweep import Sweep

REFLECTIONS = ("S11", "S22")


@dataclass(frozen=True)
class SweepDrift:
    """One sweep's drift from the reference (frequencies in Hz, phases in degrees)."""

    max_db: float
    rms_db: float
    max_deg: float
    rms_deg: float
    resonance_hz: float | None = None
    resonance_shift_hz: float | None = None
    worst_swr: float | None = None
    worst_swr_rise: float | None = None

    def to_dict(self) -> dict[str, float | None]:
        return {key: finite_or_none(getattr(self, key)) for key in self.__dataclass_fields__}

    def metric(self, name: str) -> float | None:
        """A watched quantity by alarm name (magnitudes for the signed shifts)."""
        value = {
            "deviation_db": self.max_db, "deviation_deg": self.max_deg,
            "resonance_shift_hz": _abs(self.resonance_shift_hz),
            "worst_swr": self.worst_swr, "worst_swr_rise": self.worst_swr_rise,
        }.get(name)
        return finite_or_none(value)


@dataclass(frozen=True)
class Reference:
    """What each sweep is compared with: one parameter on the plan's frequency grid."""

    freq_hz: np.ndarray
    values: np.ndarray  # complex (n,)
    parameter: str
    band_mask: np.ndarray  # bool (n,): points inside the SWR band
    resonance_hz: float | None
    worst_swr: float | None
    source: str  # "first sweep <seq>" or the file


def make_reference(sweep: Sweep, parameter: str, band_hz: tuple[float, float] | None,
                   source: str, freq_hz: np.ndarray | None = None) -> Reference:
    """The reference from a sweep, resampled onto ``freq_hz`` when that grid differs."""
    grid = sweep.freq_hz if freq_hz is None else np.asarray(freq_hz, dtype=np.float64)
    values = sweep.param(parameter)
    if grid.shape != sweep.freq_hz.shape or not np.array_equal(grid, sweep.freq_hz):
        values = _resample(sweep.freq_hz, values, grid, source)
    band = _band_mask(grid, band_hz)
    resonance = worst = None
    if parameter in REFLECTIONS:
        resonance = resonance_min_gamma(grid, values).freq_hz
        worst = _worst_swr(values, band)
    return Reference(grid, values, parameter, band, resonance, worst, source)


def reference_from_file(path: Path, parameter: str, band_hz: tuple[float, float] | None,
                        freq_hz: np.ndarray) -> Reference:
    """Read a Touchstone reference; its range must cover the plan's sweep."""
    from acquire.touchstone import read_touchstone

    sweep = read_touchstone(path).to_sweep()
    try:
        sweep.param(parameter)
    except ValueError:
        raise PlanError(
            f"soak reference {path}: has {sweep.ports} port(s), no {parameter}"
        ) from None
    return make_reference(sweep, parameter, band_hz, str(path), freq_hz)


def deviation(reference: Reference, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per-point change of |S| in dB and of phase in degrees, against the reference."""
    delta_db = db20(values) - db20(reference.values)
    delta_deg = np.degrees(np.angle(values * np.conj(reference.values)))
    return delta_db, delta_deg


def measure_drift(reference: Reference, sweep: Sweep) -> tuple[SweepDrift, np.ndarray, np.ndarray]:
    """The drift summary of one sweep, plus the per-point dB and degree changes."""
    if sweep.freq_hz.shape != reference.freq_hz.shape or not np.allclose(
        sweep.freq_hz, reference.freq_hz, rtol=1e-12, atol=1e-3
    ):
        raise PlanError(
            f"soak: sweep frequencies ({sweep.points} points from {sweep.freq_hz[0]:g} Hz) "
            f"differ from the reference's ({reference.freq_hz.size} points from "
            f"{reference.freq_hz[0]:g} Hz)"
        )
    values = sweep.param(reference.parameter)
    delta_db, delta_deg = deviation(reference, values)
    abs_db, abs_deg = np.abs(delta_db), np.abs(delta_deg)
    resonance = shift = worst = rise = None
    if reference.parameter in REFLECTIONS:
        resonance = resonance_min_gamma(sweep.freq_hz, values).freq_hz
        shift = resonance - reference.resonance_hz
        worst = _worst_swr(values, reference.band_mask)
        rise = worst - reference.worst_swr
    drift = SweepDrift(
        max_db=float(abs_db.max()), rms_db=float(np.sqrt(np.mean(delta_db**2))),
        max_deg=float(abs_deg.max()), rms_deg=float(np.sqrt(np.mean(delta_deg**2))),
        resonance_hz=resonance, resonance_shift_hz=shift, worst_swr=worst, worst_swr_rise=rise,
    )
    return drift, delta_db, delta_deg


def _band_mask(freq: np.ndarray, band_hz: tuple[float, float] | None) -> np.ndarray:
    if band_hz is None:
        return np.ones(freq.shape, dtype=bool)
    mask = (freq >= band_hz[0]) & (freq <= band_hz[1])
    if not mask.any():  # a band narrower than the point spacing: take the nearest point
        mask[int(np.argmin(np.abs(freq - 0.5 * (band_hz[0] + band_hz[1]))))] = True
    return mask


def _worst_swr(values: np.ndarray, band: np.ndarray) -> float:
    return float(swr(np.abs(values[band])).max())


def _resample(freq: np.ndarray, values: np.ndarray, grid: np.ndarray, source: str) -> np.ndarray:
    if grid[0] < freq[0] * (1 - 1e-9) or grid[-1] > freq[-1] * (1 + 1e-9):
        raise PlanError(
            f"soak reference {source}: covers {freq[0]:g} Hz .. {freq[-1]:g} Hz, the sweep "
            f"needs {grid[0]:g} Hz .. {grid[-1]:g} Hz"
        )
    # Linear in real and imaginary parts (common practice between close points).
    return np.interp(grid, freq, values.real) + 1j * np.interp(grid, freq, values.imag)




def _abs(value: float | None) -> float | None:
    return None if value is None else abs(value)
