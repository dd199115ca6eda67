"""The optional verification at the end of a guided calibration.

Either the load is measured again (reference: its kit model; this only tests connection
repeatability and drift, as re-measuring a cal standard returns its model), or a
verification device in the fixture's device position is compared with a reference
Touchstone file (S11; interpolated onto the cal grid with its delay removed, never
extrapolated; all four S-parameters from an .s2p after a full two-port calibration).
Pass when |Γ_meas − Γ_ref| stays within the tolerance at every point
(EURAMET cg-12, "Guidelines on the Evaluation of Vector Network Analysers", v3.0, 2018:
compare with the combined uncertainty). The default tolerance is the residual reading
error of the calibration plus ``REPEATABILITY`` for a verification device, and
``REPEATABILITY`` alone for the load (common practice). A transmission parameter of a
two-port check device is allowed |S21|·(T + M·(|S11| + |S22|)) + ``REPEATABILITY``, with
T and M the residual tracking and source match of the estimate (the first-order terms of
the 12-term model, load match taken as large as source match; common practice).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from acquire.calibration import (
    ResidualEstimate,
    Verification,
    check_tolerance,
    verify_check_standard,
)
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


def reference(spec: VerifySpec, freq_hz: np.ndarray, load_model: np.ndarray | None,
              param: str = "S11") -> np.ndarray:
    """The reference values of ``param`` (Γ_ref for S11) on the cal grid."""
    if spec.uses_load:
        if load_model is None:
            raise CalError("--verify load: this calibration method measures no load; "
                           "give a verification device's Touchstone file instead")
        return load_model
    from acquire.touchstone import read_touchstone

    sweep = read_touchstone(Path(spec.target)).to_sweep()
    if max(int(param[1]), int(param[2])) > sweep.ports:
        raise CalError(f"verification reference {spec.target} holds {sweep.ports} port(s); a "
                       f"two-port calibration is verified against all four S-parameters: "
                       f"give an .s2p file")
    ref_f, ref = sweep.freq_hz, sweep.param(param)
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


def transmission_tolerance(refs: dict[str, np.ndarray], param: str,
                           estimate: ResidualEstimate) -> np.ndarray:
    """Allowed |ΔSij| of a transmission parameter (see the module docstring)."""
    mismatch = np.abs(refs["S11"]) + np.abs(refs["S22"])
    return np.abs(refs[param]) * (estimate.tracking + estimate.source_match * mismatch) \
        + REPEATABILITY


def verify_two_port(spec: VerifySpec, freq_hz: np.ndarray, corrected: dict[str, np.ndarray],
                    estimate: ResidualEstimate | None) -> Verification:
    """All four corrected parameters against the .s2p reference; the worst one reports."""
    params = ("S11", "S21", "S12", "S22")
    refs = {p: reference(spec, freq_hz, None, p) for p in params}
    results = []
    for p in params:
        if spec.tolerance is not None:
            allowed: np.ndarray | float = spec.tolerance
        elif estimate is None:
            raise CalError("verification needs --verify-tolerance (no residual estimate)")
        elif p in ("S11", "S22"):
            allowed = check_tolerance(refs[p], estimate, REPEATABILITY)
        else:
            allowed = transmission_tolerance(refs, p, estimate)
        results.append(verify_check_standard(freq_hz, corrected[p], refs[p], allowed,
                                             name=f"{spec.name} {p}"))
    failing = [v for v in results if not v.passed]
    return failing[0] if failing else max(results, key=lambda v: v.worst_error / v.allowed)
