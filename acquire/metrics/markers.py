"""Values between sweep points: linear interpolation and markers."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from acquire.metrics import conversions as cv
from acquire.metrics.errors import MetricError
from acquire.units import format_frequency


def interpolate_at(freq_hz: ArrayLike, values: ArrayLike, at_hz: ArrayLike) -> np.ndarray:
    """Linear interpolation of a real or complex trace at frequencies inside the sweep.

    Complex traces are interpolated on real and imaginary parts (not magnitude and
    phase), which is exact for a straight line in the complex plane.
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    v = np.asarray(values)
    at = np.asarray(at_hz, dtype=np.float64)
    if f.size == 0:
        raise MetricError("cannot interpolate an empty sweep")
    outside = (at < f[0]) | (at > f[-1]) | np.isnan(at)
    if outside.any():
        bad = float(np.atleast_1d(at)[np.atleast_1d(outside)][0])
        raise MetricError(
            f"{format_frequency(bad)} lies outside the sweep "
            f"{format_frequency(f[0])} to {format_frequency(f[-1])}"
        )
    if np.iscomplexobj(v):
        return np.interp(at, f, v.real) + 1j * np.interp(at, f, v.imag)
    return np.interp(at, f, v)


@dataclass(frozen=True)
class Marker:
    """One S-parameter value at one frequency, with the usual readouts."""

    freq_hz: float
    value: complex
    z0: float = 50.0

    @property
    def db(self) -> float:
        return float(cv.db20(self.value))

    @property
    def phase_deg(self) -> float:
        return float(cv.phase_deg(self.value))

    @property
    def swr(self) -> float:
        return float(cv.swr(self.value))

    @property
    def return_loss_db(self) -> float:
        return float(cv.return_loss_db(self.value))

    @property
    def impedance(self) -> complex:
        return complex(cv.impedance(self.value, self.z0))

    @property
    def admittance(self) -> complex:
        return complex(cv.admittance(self.value, self.z0))

    def label(self) -> str:
        """Plain-ASCII one-liner for a reflection marker: f, R + jX, SWR."""
        z = self.impedance
        sign = "+" if z.imag >= 0 else "-"
        return (
            f"{format_frequency(self.freq_hz)}  {z.real:.1f} {sign} j{abs(z.imag):.1f} ohm"
            f"  SWR {self.swr:.2f}"
        )


def marker(freq_hz: ArrayLike, values: ArrayLike, at_hz: float, z0: float = 50.0) -> Marker:
    """A marker at any frequency inside the sweep (value interpolated linearly)."""
    value = complex(interpolate_at(freq_hz, np.asarray(values, dtype=np.complex128), at_hz))
    return Marker(float(at_hz), value, z0)


# -- markers asked for by a person: at a frequency or at a feature of the trace ----------

FEATURES = ("min", "max", "edges")
LEVELS = {"swr": "SWR", "db": "dB"}  # level-crossing markers: swr=2, db=-10
MAX_CROSSINGS = 12  # a noisy trace crossing a level hundreds of times gets the first few
SPEC_HELP = ("FREQ (2.45GHz), min, max, edges, swr=LEVEL or db=LEVEL (every crossing), "
             "each optionally after a parameter: S21:max")


@dataclass(frozen=True)
class MarkerSpec:
    """A marker as asked on the command line: ``[Sij:]what``."""

    text: str
    parameter: str | None  # None: the first reflection (S11)
    kind: str  # "frequency", one of FEATURES, or "level"
    freq_hz: float = 0.0
    level_quantity: str = ""  # "swr" or "db" for a level crossing
    level: float = 0.0


def parse_marker_spec(text: str) -> MarkerSpec:
    """Read ``2.45GHz``, ``min``, ``S21:max``, ``edges``, ``swr=2``, ``S21:db=-3``."""
    from acquire.units import parse_quantity

    raw = text.strip()
    parameter, _, what = raw.rpartition(":")
    parameter = parameter.strip().upper() or None
    what = what.strip().lower()
    if parameter is not None and not _is_parameter(parameter):
        raise MetricError(f"marker {text!r}: {parameter!r} is not a parameter such as S11 or S21")
    if what in FEATURES:
        return MarkerSpec(raw, parameter, what)
    name, eq, level = what.partition("=")
    try:
        if eq:
            if name.strip() not in LEVELS:
                raise ValueError(f"a level crossing is swr=LEVEL or db=LEVEL, not {name!r}")
            value = float(level.strip().removesuffix("db"))
            if not np.isfinite(value) or (name.strip() == "swr" and value < 1.0):
                raise ValueError(f"level {level.strip()!r} must be finite (SWR at least 1)")
            return MarkerSpec(raw, parameter, "level", level_quantity=name.strip(), level=value)
        return MarkerSpec(raw, parameter, "frequency", freq_hz=parse_quantity(what, "frequency"))
    except ValueError as exc:
        raise MetricError(f"marker {text!r}: {exc}; use {SPEC_HELP}") from None


def _is_parameter(name: str) -> bool:
    return len(name) == 3 and name[0] == "S" and name[1:].isdigit() and "0" not in name[1:]


@dataclass(frozen=True)
class Readout:
    """A placed marker: where, why, and its value in every quantity."""

    key: str  # short tag drawn beside the point ("1", "2", ...)
    what: str  # in words: "minimum |S11|", "SWR 2 low edge", "at 2.45 GHz"
    parameter: str
    marker: Marker
    group_delay_s: float

    @property
    def reflection(self) -> bool:
        return self.parameter[1] == self.parameter[2]

    def values(self) -> dict[str, float]:
        """Every quantity at the marker (SWR, return loss, R, X for a reflection only)."""
        mk = self.marker
        out = {"frequency_hz": mk.freq_hz, "magnitude_db": mk.db, "phase_deg": mk.phase_deg,
               "group_delay_s": self.group_delay_s}
        if self.reflection:
            z = mk.impedance
            out |= {"swr": mk.swr, "return_loss_db": mk.return_loss_db,
                    "resistance_ohm": z.real, "reactance_ohm": z.imag}
        return out

    def head(self) -> str:
        """Key, what, parameter and frequency: ``1 minimum |S11|  S11 2.45 GHz``."""
        return f"{self.key} {self.what}  {self.parameter} {format_frequency(self.marker.freq_hz)}"

    def values_text(self) -> str:
        """Every quantity in one ASCII run: SWR, RL and Z (reflection), dB, phase, delay."""
        mk = self.marker
        parts = [f"mag {mk.db:.2f} dB", f"phase {mk.phase_deg:.1f} deg"]
        if self.reflection:
            z = mk.impedance
            sign = "+" if z.imag >= 0 else "-"
            parts[:0] = [f"SWR {mk.swr:.3f}", f"RL {mk.return_loss_db:.2f} dB",
                         f"Z {z.real:.1f} {sign} j{abs(z.imag):.1f} ohm"]
        parts.append(f"delay {_format_delay(self.group_delay_s)}")
        return "  ".join(parts)

    def line(self) -> str:
        """One ASCII line: the head, then every quantity."""
        return f"{self.head()}:  {self.values_text()}"

    def to_dict(self) -> dict[str, object]:
        return {"key": self.key, "what": self.what, "parameter": self.parameter,
                **{k: _finite_or_none(v) for k, v in self.values().items()}}


def _format_delay(seconds: float) -> str:
    if not np.isfinite(seconds):
        return "n/a"
    return f"{seconds * 1e9:.4g} ns" if abs(seconds) >= 1e-9 else f"{seconds * 1e12:.4g} ps"


def _finite_or_none(value: float) -> float | None:
    return float(value) if np.isfinite(value) else None


def place_markers(freq_hz: ArrayLike, params: dict[str, np.ndarray], specs: list[MarkerSpec],
                  z0: dict[str, float], default: str = "S11") -> list[Readout]:
    """Resolve ``specs`` on the traces in ``params`` (name -> complex trace); keys number
    the markers 1, 2, ... in order. Errors name the marker and what is wrong."""
    f = np.asarray(freq_hz, dtype=np.float64)
    found: list[tuple[str, str, float]] = []
    for spec in specs:
        parameter = spec.parameter or default
        if parameter not in params:
            raise MetricError(f"marker {spec.text!r}: the sweep has no {parameter} "
                              f"(it has {', '.join(params)})")
        placed = _resolve(f, params[parameter], spec, parameter)
        found += [(parameter, what, at) for what, at in placed]
    out = []
    for number, (parameter, what, at) in enumerate(found, start=1):
        s = params[parameter]
        with np.errstate(all="ignore"):
            delay = float(np.interp(at, f, cv.group_delay_s(f, s))) if f.size > 1 else np.nan
        out.append(Readout(str(number), what, parameter, marker(f, s, at, z0[parameter]), delay))
    return out


def _resolve(f: np.ndarray, s: np.ndarray, spec: MarkerSpec, param: str) -> list[tuple[str, float]]:
    from acquire.metrics import features as ft

    if not np.all(np.isfinite(s)):
        raise MetricError(f"marker {spec.text!r}: {param} has non-finite values")
    if spec.kind == "frequency":
        try:
            interpolate_at(f, s.real, spec.freq_hz)
        except MetricError as exc:
            raise MetricError(f"marker {spec.text!r}: {exc}") from None
        return [(f"at {format_frequency(spec.freq_hz)}", spec.freq_hz)]
    if spec.kind == "min":
        return [(f"minimum |{param}|", ft.resonance_min_gamma(f, s).freq_hz)]
    if spec.kind == "max":
        return [(f"maximum |{param}|", _maximum(f, np.abs(s)))]
    if spec.kind == "edges":
        return _edges(f, s, param)
    values = cv.swr(s) if spec.level_quantity == "swr" else cv.db20(s)
    unit = "SWR " if spec.level_quantity == "swr" else ""
    text = f"{spec.level:g}" + (" dB" if spec.level_quantity == "db" else "")
    cross = ft.zero_crossings(f, np.nan_to_num(values, posinf=1e30) - spec.level)
    return [(f"{'up' if r else 'down'} through {unit}{text}", float(x))
            for x, r in zip(cross.freq_hz[:MAX_CROSSINGS], cross.rising[:MAX_CROSSINGS],
                            strict=True)]


def _maximum(f: np.ndarray, mag: np.ndarray) -> float:
    from acquire.metrics.features import parabola_vertex

    k = int(np.argmax(mag))
    if k == 0 or k == f.size - 1:
        return float(f[k])
    fv, _ = parabola_vertex(f[k - 1:k + 2], mag[k - 1:k + 2])
    return min(max(fv, float(f[k - 1])), float(f[k + 1]))


def _edges(f: np.ndarray, s: np.ndarray, param: str) -> list[tuple[str, float]]:
    """Band edges: SWR 2 around the minimum for a reflection, 3 dB below the maximum for
    a transmission (edges at the sweep's ends are not crossings and are left out)."""
    from acquire.metrics import features as ft

    if param[1] == param[2]:
        band = ft.bandwidth(f, s, swr_max=2.0).band
        name = "SWR 2"
    else:
        db = cv.db20(s)
        peak = _maximum(f, np.abs(s))
        band = next((b for b in ft.bands_below(f, -db, -(float(np.max(db)) - 3.0))
                     if b.contains(peak)), None)
        name = "-3 dB"
    if band is None:
        return []
    edges = [] if band.lo_open else [(f"{name} low edge", band.lo_hz)]
    return edges + ([] if band.hi_open else [(f"{name} high edge", band.hi_hz)])


def sweep_markers(sweep, texts: list[str]) -> list[Readout]:
    """Markers ``texts`` (command-line specs) placed on every parameter of ``sweep``."""
    specs = [parse_marker_spec(t) for t in texts]
    names = [f"S{i + 1}{j + 1}" for i in range(sweep.ports) for j in range(sweep.ports)]
    params = {n: sweep.param(n) for n in names}
    z0 = {n: float(sweep.z0[int(n[1]) - 1]) for n in names}
    return place_markers(sweep.freq_hz, params, specs, z0)
