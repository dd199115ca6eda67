"""The optional verification at the end of a guided calibration.

Either the load is measured again (reference: its kit model; this only tests connection
repeatability and drift, as re-measuring a cal standard returns its model), or a
verification device in the fixture's device position is compared with a reference
Touchstone file (S11; interpolated onto the cal grid with its delay removed, never
extrapolated). Pass when |Γ_meas − Γ_ref| stays within the tolerance at every point
(EURAMET cg-12, "Guidelines on the Evaluation of Vector Network Analysers", v3.0, 2018:
compare with the combined uncertainty). The default tolerance is the residual reading
error of the calibration plus ``REPEATABILITY`` for a verification device, and
``REPEATABILITY`` alone for the load (common practice).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from acquire.calibration import ResidualEstimate, check_tolerance
from acquire.calibration.interpolate import interpolate_term
from acquire.errors import CalError
from acquire.units import format_frequency

REPEATABILITY = 0.01  # |Γ|, connection repeatability of a good coaxial connector (common practice)


@dataclass(frozen=True)
class VerifySpec:
    """``target``: 'load' or a Touchstone path; ``tolerance``: |ΔΓ| or None (derived)."""

    target: str
    tolerance: float | None = None

    @property
    def uses_load(self) -> bool:
        return self.target == "load"

    @property
    def position(self) -> str:
        """The fixture position holding the check standard."""
        return "load" if self.uses_load else "device"

    @property
    def name(self) -> str:
        return "load (measured again)" if self.uses_load else "verification device"

    @property
    def label(self) -> str:
        return "the LOAD again" if self.uses_load else f"the verification device ({self.target})"


def reference(spec: VerifySpec, freq_hz: np.ndarray, load_model: np.ndarray | None
              ) -> np.ndarray:
    """Γ_ref on the cal grid."""
    if spec.uses_load:
        if load_model is None:
            raise CalError("--verify load: this calibration method measures no load; "
                           "give a verification device's Touchstone file instead")
        return load_model
    from acquire.touchstone import read_touchstone

    sweep = read_touchstone(Path(spec.target)).to_sweep()
    ref_f, ref = sweep.freq_hz, sweep.param("S11")
    f = np.asarray(freq_hz, np.float64)
    if ref_f.shape == f.shape and np.allclose(ref_f, f, rtol=1e-9, atol=0.0):
        return np.asarray(ref, np.complex128)
    span = (f[-1] - f[0]) * 1e-9
    if ref_f.size < 2 or f[0] < ref_f[0] - span or f[-1] > ref_f[-1] + span:
        raise CalError(f"verification reference {spec.target} covers "
                       f"{format_frequency(ref_f[0])} to {format_frequency(ref_f[-1])}; the "
                       f"calibration spans {format_frequency(f[0])} to {format_frequency(f[-1])}"
                       " (a reference is never extrapolated)")
    values, _ = interpolate_term(ref_f, np.asarray(ref, np.complex128), f)
    return values


def tolerance(spec: VerifySpec, ref: np.ndarray, estimate: ResidualEstimate | None
              ) -> np.ndarray | float:
    """Allowed |ΔΓ| per point."""
    if spec.tolerance is not None:
        return spec.tolerance
    if spec.uses_load:
        return REPEATABILITY
    if estimate is None:
        raise CalError("verification needs --verify-tolerance with this method (it leaves "
                       "directivity or source match uncorrected, so no residual estimate)")
    return check_tolerance(ref, estimate, REPEATABILITY)
