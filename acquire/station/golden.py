"""The golden-unit check: the reference unit measured now against its stored Touchstone.

Point by point over the compared band, for every measured S-parameter:

- magnitude difference ``20·log10|S| − 20·log10|S_ref|`` in dB and phase difference
  ``angle(S·conj(S_ref))`` in degrees (wrapped to ±180°), both judged only where the
  reference lies above ``min_level`` (near a deep match both are ill-conditioned: a tiny
  vector change moves them a lot);
- the vector difference ``|S − S_ref|`` (linear), judged everywhere.

The worst of each is compared with the plan's tolerance. A difference above it means the
fixture, the test cable or the golden unit has moved since the reference was taken (or
since the calibration): the line stops until a recalibration or a good re-check.
Magnitude in dB as in Pozar, Microwave Engineering, 4th ed., ch. 2.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from acquire.checks import CheckResult, Verdict
from acquire.errors import TouchstoneError
from acquire.plan import Plan
from acquire.station.errors import GoldenError
from acquire.sweep import Sweep
from acquire.touchstone import read_touchstone
from acquire.units import format_duration, format_frequency
from acquire.yamlfile import Node

# Golden-check defaults: our own choice for a reflection check (not from a standard).
# Magnitude and phase are judged only where the reference is above min_level, since
# both are ill-conditioned near a deep match; the vector difference holds everywhere.
DEFAULT_TOLERANCE_DB = 0.5
DEFAULT_TOLERANCE_DEG = 5.0
DEFAULT_MIN_LEVEL_DB = -40.0
GRID_RTOL = 1e-9  # frequencies written in a file with fewer digits still count as equal


@dataclass(frozen=True)
class Tolerance:
    """Allowed point-by-point difference between the golden unit and its reference."""

    magnitude_db: float | None = DEFAULT_TOLERANCE_DB
    phase_deg: float | None = DEFAULT_TOLERANCE_DEG
    vector: float | None = None  # |S_measured - S_reference|, linear
    min_level_db: float = DEFAULT_MIN_LEVEL_DB

    def describe(self) -> str:
        parts = []
        if self.magnitude_db is not None:
            parts.append(f"{self.magnitude_db:g} dB")
        if self.phase_deg is not None:
            parts.append(f"{self.phase_deg:g} deg")
        if self.vector is not None:
            parts.append(f"|dS| {self.vector:g}")
        return ", ".join(parts)


@dataclass(frozen=True)
class GoldenSpec:
    """The reference unit, its stored Touchstone file, the schedule and the tolerance."""

    serial: str
    reference: Path
    at_start: bool = True
    every_units: int | None = None
    every_s: float | None = None
    band_hz: tuple[float, float] | None = None
    tolerance: Tolerance = field(default_factory=Tolerance)

    def describe(self) -> str:
        when = ["at start"] if self.at_start else []
        if self.every_units:
            when.append(f"every {self.every_units} units")
        if self.every_s:
            when.append(f"every {format_duration(self.every_s)}")
        return (f"golden unit {self.serial} ({', '.join(when) or 'on request'}; "
                f"tolerance {self.tolerance.describe()})")


def load_reference(spec: GoldenSpec, plan: Plan, node: Node | None = None) -> Sweep:
    """Read the golden reference and check it fits the plan (ports, frequency grid)."""
    def fail(message: str) -> Any:
        if node is not None:
            node.fail(message)
        raise GoldenError(f"golden reference {spec.reference}: {message}")

    try:
        ref = read_touchstone(spec.reference).to_sweep()
    except TouchstoneError as exc:
        return fail(str(exc))
    if ref.ports < plan.ports:
        fail(f"{spec.reference.name} has {ref.ports} port(s); the plan measures {plan.ports}")
    freq = plan.stimulus.frequencies()
    if not same_grid(ref.freq_hz, freq):
        fail(f"{spec.reference.name} holds {_grid(ref.freq_hz)}; the plan sweeps {_grid(freq)}: "
             "measure the golden unit again with this plan and store that file")
    return ref


def same_grid(a: np.ndarray, b: np.ndarray) -> bool:
    a, b = np.asarray(a, np.float64), np.asarray(b, np.float64)
    if a.shape != b.shape:
        return False
    return bool(np.allclose(a, b, rtol=0.0, atol=GRID_RTOL * max(float(np.max(b)), 1.0)))


@dataclass(frozen=True)
class Worst:
    """The largest difference of one kind: value, frequency, S-parameter."""

    value: float
    freq_hz: float
    parameter: str

    def to_dict(self) -> dict[str, Any]:
        return {"value": self.value, "freq_hz": self.freq_hz, "parameter": self.parameter}


@dataclass(frozen=True)
class GoldenResult:
    passed: bool
    message: str
    points: int
    magnitude_db: Worst | None = None
    phase_deg: Worst | None = None
    vector: Worst | None = None
    limits: tuple[float | None, float | None, float | None] = (None, None, None)
    reference: str = ""
    serial: str = ""

    def to_dict(self) -> dict[str, Any]:
        return {
            "passed": self.passed, "message": self.message, "points": self.points,
            **{k: (w.to_dict() if w else None) for k, w in (
                ("magnitude_db", self.magnitude_db), ("phase_deg", self.phase_deg),
                ("vector", self.vector))},
        }


def differences(measured: np.ndarray, reference: np.ndarray, min_level_db: float
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """|dB difference|, |phase difference| (deg), |vector difference| and the mask of
    points where the reference is above ``min_level_db`` (dB and phase judged there)."""
    m = np.asarray(measured, np.complex128)
    r = np.asarray(reference, np.complex128)
    level = np.abs(r) >= 10.0 ** (min_level_db / 20.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        db = np.abs(20.0 * np.log10(np.abs(m)) - 20.0 * np.log10(np.abs(r)))
    deg = np.abs(np.angle(m * np.conj(r), deg=True))
    vec = np.abs(m - r)
    return db, deg, vec, level


def compare(measured: Sweep, reference: Sweep, spec: GoldenSpec,
            parameters: tuple[str, ...]) -> GoldenResult:
    """Judge the golden unit's sweep against its reference (see the module docstring)."""
    if not same_grid(measured.freq_hz, reference.freq_hz):
        raise GoldenError(f"golden unit {spec.serial}: the sweep ({_grid(measured.freq_hz)}) "
                          f"and the reference {spec.reference.name} "
                          f"({_grid(reference.freq_hz)}) are on different grids")
    f = measured.freq_hz
    lo, hi = spec.band_hz or (float(f[0]), float(f[-1]))
    slack = GRID_RTOL * max(float(f[-1]), 1.0)
    band = (f >= lo - slack) & (f <= hi + slack)
    if not band.any():
        raise GoldenError(f"golden unit {spec.serial}: no sweep point in "
                          f"{format_frequency(lo)}..{format_frequency(hi)}")
    m = np.stack([measured.param(p)[band] for p in parameters])
    r = np.stack([reference.param(p)[band] for p in parameters])
    fb = f[band]
    points = int(band.sum())
    if not (np.all(np.isfinite(m)) and np.all(np.isfinite(r))):
        return GoldenResult(False, f"golden unit {spec.serial}: non-finite values in the "
                            "measurement or the reference; check the setup and measure again",
                            points)
    tol = spec.tolerance
    db, deg, vec, level = differences(m, r, tol.min_level_db)
    worst_db = _worst(db, level, fb, parameters)
    worst_deg = _worst(deg, level, fb, parameters)
    worst_vec = _worst(vec, np.ones_like(level), fb, parameters)
    over = []
    for label, worst, limit, unit in (("magnitude", worst_db, tol.magnitude_db, " dB"),
                                      ("phase", worst_deg, tol.phase_deg, " deg"),
                                      ("vector", worst_vec, tol.vector, "")):
        if limit is not None and worst is not None and not worst.value <= limit:
            over.append(f"{label} {worst.value:.3g}{unit} at {worst.parameter} "
                        f"{format_frequency(worst.freq_hz)} (allowed {limit:g}{unit})")
    if over:
        message = (f"golden unit {spec.serial} is OUT OF TOLERANCE against "
                   f"{spec.reference.name}: {'; '.join(over)}. The fixture or test cable has "
                   "moved (or the golden unit is not seated): recalibrate, or re-seat it and "
                   "check again")
    else:
        message = (f"golden unit {spec.serial} within tolerance ({tol.describe()}): worst "
                   + ", ".join(_shown(w, u) for w, u in ((worst_db, " dB"), (worst_deg, " deg"),
                                                         (worst_vec, "")) if w is not None))
    return GoldenResult(not over, message, points, worst_db, worst_deg, worst_vec,
                        (tol.magnitude_db, tol.phase_deg, tol.vector), spec.reference.name,
                        spec.serial)


WORST_KINDS = (("magnitude_db", "magnitude", " dB"), ("phase_deg", "phase", " deg"),
               ("vector", "|dS|", ""))


def golden_check(result: GoldenResult) -> CheckResult:
    """The golden comparison as a check result: worst deviation of each kind, where it is
    and its limit (the verdict of a golden capture)."""
    worst: dict[str, Any] = {}
    parts = []
    for (key, label, unit), limit in zip(WORST_KINDS, result.limits, strict=True):
        found: Worst | None = getattr(result, key)
        if found is None:
            worst[key] = None
            continue
        worst[key] = {**found.to_dict(), "limit": limit}
        bound = f"limit {limit:g}{unit}" if limit is not None else "no limit"
        parts.append(f"{label} {found.value:.3g}{unit} at {found.parameter} "
                     f"{format_frequency(found.freq_hz)} ({bound})")
    name = f"golden {result.serial}".strip()
    summary = f"{name} vs {result.reference}: " + (", ".join(parts) or result.message)
    return CheckResult("golden", name, "pass" if result.passed else "fail", summary,
                       details={"reference": result.reference, "points": result.points,
                                "worst": worst})


def golden_verdict(unit: Verdict, result: GoldenResult) -> Verdict:
    """A golden capture's verdict: the golden comparison decides it; the plan's own
    checks on the golden unit are kept in ``metrics.unit_checks`` for information."""
    metrics = {**unit.metrics, "golden_check": result.to_dict(),
               "unit_checks": [r.to_dict() for r in unit.results]}
    return Verdict((golden_check(result),), unit.sweep_info, metrics)


def _worst(values: np.ndarray, valid: np.ndarray, freq: np.ndarray,
           parameters: tuple[str, ...]) -> Worst | None:
    if not valid.any():
        return None
    masked = np.where(valid, values, -np.inf)
    k, i = np.unravel_index(int(np.argmax(masked)), masked.shape)
    value = float(masked[k, i])
    return Worst(value if np.isfinite(value) else float("inf"), float(freq[i]), parameters[k])


def _shown(worst: Worst, unit: str) -> str:
    label = {" dB": "", " deg": "", "": "|dS| "}[unit]
    return f"{label}{worst.value:.3g}{unit} ({worst.parameter} {format_frequency(worst.freq_hz)})"


def _grid(freq: np.ndarray) -> str:
    f = np.asarray(freq)
    if f.size == 0:
        return "no points"
    return f"{f.size} points {format_frequency(float(f[0]))}..{format_frequency(float(f[-1]))}"
