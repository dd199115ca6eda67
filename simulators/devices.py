"""Devices under test: what sits at the reference plane(s) when the fixture selects "device".

One-port: ``resonator`` (an antenna-like series or parallel RLC behind a short line) and
``impedance`` (a fixed R + jX, e.g. a 25 Ω check standard). Two-port: ``cable`` (lossy,
slightly mismatched line), ``filter`` (coupled-resonator band-pass) and ``attenuator``
(resistive pi pad, optionally designed for another impedance, between short lines). Each
device gives its true S (n, p, p) on any grid and can be shifted in frequency by the drift
model.

Presets (plain names for the demo and tests): ``patch-2g45``, ``whip-915``, ``cable-1m``,
``bandpass-2g45``, ``check-25ohm``, ``attenuator-10db``. The RLC element values follow
Pozar, Microwave Engineering, 4th ed., ch. 6: series Q0 = ω0L/R, parallel Q0 = R/(ω0L),
ω0 = 1/√(LC).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np

from simulators.errors import SimError
from simulators.filters import bandpass_s
from simulators.lines import abcd_to_s, coax_gamma_l, reflection, two_port, uniform_line

Z0 = 50.0


@dataclass(frozen=True)
class Resonator:
    """RLC resonator (antenna model) behind a lossless line of ``line_delay_s`` one way."""

    f0_hz: float = 2.45e9
    q: float = 40.0
    r_ohm: float = 50.0
    topology: str = "parallel"
    line_delay_s: float = 0.0
    line_z_ohm: float = Z0
    kind: ClassVar[str] = "resonator"
    ports: ClassVar[int] = 1
    shift_field: ClassVar[str | None] = "f0_hz"

    def check(self) -> None:
        _positive(self, "f0_hz", "q", "r_ohm", "line_z_ohm")
        _non_negative(self, "line_delay_s")
        if self.topology not in ("series", "parallel"):
            raise SimError(f"device resonator: topology must be 'series' or 'parallel', "
                           f"got {self.topology!r}")

    def s(self, freq_hz: np.ndarray) -> np.ndarray:
        w = 2.0 * np.pi * np.asarray(freq_hz, dtype=np.float64)
        w0 = 2.0 * np.pi * self.f0_hz
        if self.topology == "series":
            ind = self.q * self.r_ohm / w0
            cap = 1.0 / (w0 * w0 * ind)
            z = self.r_ohm + 1j * w * ind + 1.0 / (1j * w * cap)
        else:
            ind = self.r_ohm / (w0 * self.q)
            cap = 1.0 / (w0 * w0 * ind)
            z = 1.0 / (1.0 / self.r_ohm + 1.0 / (1j * w * ind) + 1j * w * cap)
        if self.line_delay_s > 0:
            t = 1j * np.tan(w * self.line_delay_s)  # tanh(jβl) of a lossless line
            zl = self.line_z_ohm
            z = zl * (z + zl * t) / (zl + z * t)
        return reflection(z, Z0).reshape(-1, 1, 1)


@dataclass(frozen=True)
class Impedance:
    """A frequency-flat impedance R + jX (check standard, mismatch)."""

    r_ohm: float = 25.0
    x_ohm: float = 0.0
    kind: ClassVar[str] = "impedance"
    ports: ClassVar[int] = 1
    shift_field: ClassVar[str | None] = None

    def check(self) -> None:
        _non_negative(self, "r_ohm")

    def s(self, freq_hz: np.ndarray) -> np.ndarray:
        n = np.asarray(freq_hz).shape[0]
        return np.full((n, 1, 1), reflection(complex(self.r_ohm, self.x_ohm), Z0))


@dataclass(frozen=True)
class Cable:
    """A cable assembly: lossy coaxial line (loss ∝ √f) with a slightly off impedance."""

    delay_s: float = 5.0e-9
    loss_db_at_1ghz: float = 0.45
    z_ohm: float = 50.8
    kind: ClassVar[str] = "cable"
    ports: ClassVar[int] = 2
    shift_field: ClassVar[str | None] = None

    def check(self) -> None:
        _positive(self, "z_ohm")
        _non_negative(self, "delay_s", "loss_db_at_1ghz")

    def s(self, freq_hz: np.ndarray) -> np.ndarray:
        gl = coax_gamma_l(freq_hz, self.delay_s, self.loss_db_at_1ghz)
        s11, s21 = uniform_line(self.z_ohm, gl, Z0)
        return two_port(s11, s21)


@dataclass(frozen=True)
class BandPass:
    """Band-pass filter (see ``simulators.filters``); ``q`` = 0 means lossless."""

    center_hz: float = 2.45e9
    bandwidth_hz: float = 100e6
    order: int = 3
    ripple_db: float = 0.5
    q: float = 400.0
    kind: ClassVar[str] = "filter"
    ports: ClassVar[int] = 2
    shift_field: ClassVar[str | None] = "center_hz"

    def check(self) -> None:
        _positive(self, "center_hz", "bandwidth_hz")
        _non_negative(self, "ripple_db", "q")
        if not 1 <= self.order <= 9 or self.order != int(self.order):
            raise SimError(f"device filter: order must be an integer 1..9, got {self.order}")
        if self.ripple_db > 0 and self.order % 2 == 0:
            raise SimError("device filter: an equal-ripple (ripple_db > 0) design needs an odd "
                           f"order, got {self.order}")
        if self.bandwidth_hz >= 2 * self.center_hz:
            raise SimError("device filter: bandwidth_hz must be below twice center_hz")

    def s(self, freq_hz: np.ndarray) -> np.ndarray:
        return bandpass_s(freq_hz, self.center_hz, self.bandwidth_hz, int(self.order),
                          self.ripple_db, self.q, Z0)


@dataclass(frozen=True)
class Attenuator:
    """Resistive pi pad of ``attenuation_db`` designed for ``z_ohm`` (50: matched), with a
    lossless 50 Ω line of ``delay_s`` / 2 on each side (its connectors).

    Pad values (Pozar ch. 4 ABCD of shunt-series-shunt): K = 10^(A/20),
    R_shunt = Z(K + 1)/(K − 1), R_series = Z(K² − 1)/(2K).
    """

    attenuation_db: float = 10.0
    z_ohm: float = 50.0
    delay_s: float = 60e-12
    kind: ClassVar[str] = "attenuator"
    ports: ClassVar[int] = 2
    shift_field: ClassVar[str | None] = None

    def check(self) -> None:
        _positive(self, "attenuation_db", "z_ohm")
        _non_negative(self, "delay_s")

    def s(self, freq_hz: np.ndarray) -> np.ndarray:
        f = np.asarray(freq_hz, dtype=np.float64)
        k = 10.0 ** (self.attenuation_db / 20.0)
        y = (k - 1.0) / (self.z_ohm * (k + 1.0))  # shunt conductance
        r = self.z_ohm * (k * k - 1.0) / (2.0 * k)  # series resistance
        one = np.ones(f.shape, dtype=np.complex128)
        a, b, c, d = one + r * y, r * one, y * (2.0 + r * y) * one, one + r * y
        pad = abcd_to_s(a, b, c, d, Z0)
        return pad * np.exp(-2j * np.pi * f * self.delay_s)[:, None, None]


Device = Resonator | Impedance | Cable | BandPass | Attenuator
KINDS: dict[str, type] = {c.kind: c for c in (Resonator, Impedance, Cable, BandPass, Attenuator)}

PRESETS: dict[str, tuple[str, dict[str, Any]]] = {
    "patch-2g45": ("resonator", {"f0_hz": 2.45e9, "q": 14.0, "r_ohm": 58.0,
                                 "topology": "parallel", "line_delay_s": 60e-12}),
    "whip-915": ("resonator", {"f0_hz": 915e6, "q": 9.0, "r_ohm": 38.0,
                               "topology": "series", "line_delay_s": 150e-12}),
    "cable-1m": ("cable", {"delay_s": 5.0e-9, "loss_db_at_1ghz": 0.45, "z_ohm": 50.8}),
    "bandpass-2g45": ("filter", {"center_hz": 2.45e9, "bandwidth_hz": 100e6, "order": 3,
                                 "ripple_db": 0.5, "q": 400.0}),
    "check-25ohm": ("impedance", {"r_ohm": 25.0, "x_ohm": 0.0}),
    "attenuator-10db": ("attenuator", {"attenuation_db": 10.0, "z_ohm": 50.0,
                                       "delay_s": 60e-12}),
}


def make_device(kind: str, **params: Any) -> Device:
    """Build a device from a kind or preset name plus parameter overrides."""
    if kind in PRESETS:
        base_kind, base = PRESETS[kind]
        kind, params = base_kind, {**base, **params}
    cls = KINDS.get(kind)
    if cls is None:
        names = ", ".join([*KINDS, *PRESETS])
        raise SimError(f"device: unknown kind {kind!r}; allowed: {names}")
    fields = {f.name: f for f in dataclasses.fields(cls)}
    values: dict[str, Any] = {}
    for key, value in params.items():
        if key not in fields:
            raise SimError(f"device {kind}: unknown parameter {key!r}; allowed: "
                           f"{', '.join(fields)}")
        values[key] = _coerce(kind, key, value, fields[key].default)
    device = cls(**values)
    device.check()
    return device


def device_params(device: Device) -> dict[str, Any]:
    """The device's parameters as a JSON-able dict (kind included)."""
    return {"kind": device.kind, **dataclasses.asdict(device)}


def shifted(device: Device, shift_hz: float) -> Device:
    """The device with its resonance moved by ``shift_hz`` (unchanged if it has none)."""
    name = device.shift_field
    if name is None or shift_hz == 0.0:
        return device
    return dataclasses.replace(device, **{name: getattr(device, name) + shift_hz})


def _coerce(kind: str, key: str, value: Any, default: Any) -> Any:
    if isinstance(default, str):
        if not isinstance(value, str):
            raise SimError(f"device {kind}: {key} must be text, got {value!r}")
        return value
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise SimError(f"device {kind}: {key} must be a number, got {value!r}") from None
    if isinstance(value, bool) or not math.isfinite(number):
        raise SimError(f"device {kind}: {key} must be a finite number, got {value!r}")
    return int(number) if isinstance(default, int) and number == int(number) else number


def _positive(device: Any, *names: str) -> None:
    for name in names:
        if not getattr(device, name) > 0:
            raise SimError(f"device {device.kind}: {name} must be > 0, got {getattr(device, name)}")


def _non_negative(device: Any, *names: str) -> None:
    for name in names:
        if not getattr(device, name) >= 0:
            raise SimError(f"device {device.kind}: {name} must be >= 0, "
                           f"got {getattr(device, name)}")
