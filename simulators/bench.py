"""The bench: analyzer error box, fixture, standards, device, lot, drift and noise.

This is the simulated world behind the SCPI front end. ``sweep()`` returns the raw
(n, 2, 2) S-parameters the analyzer would report for what the fixture presents now;
``truth()`` and ``error_terms()`` expose the ground truth for tests.

What the fixture presents at the two reference planes (port 2 of a one-port device is
terminated in a matched load):

    open | short | load  diag(Γ_std, Γ_std) from the cal kit file (both ports)
    thru                  the kit's thru line
    device                [[Γ, 0], [0, 0]] for a one-port device, its S for a two-port one

Noise (off by default in tests): complex Gaussian added to every raw value, with
per-component sigma σ = √(10^(−90/10)/2) · 10^(−P/20) · √(IFBW / 1 kHz) / √N_avg
(receiver noise floor −90 dB at 0 dBm and 1 kHz; noise power ∝ bandwidth / source power,
averaging N sweeps divides the variance by N: the √ laws, common practice). Averaging
N sweeps is simulated by one sweep with that reduced sigma.

The switch terms a2/b2 and a1/b1 (``switch_readings``) are wave ratios read in the same
sweep: the same receiver noise, relative to the received wave b2 (b1), whose level is the
raw |S21| (|S12|) of what the fixture presents. With a thru in place the readings are good;
with nothing joining the ports they are mostly noise, as on an analyzer (which is why
they are read with the thru connected; common practice).
"""

from __future__ import annotations

import threading
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

import numpy as np

from simulators.calkit import DEFAULT_KIT, load_kit
from simulators.clock import SimClock
from simulators.devices import Device, device_params, make_device, shifted
from simulators.drift import Drift
from simulators.errorbox import measure, reference_plane_terms, switch_terms
from simulators.errors import SimError
from simulators.lines import coax_gamma_l, uniform_line
from simulators.lot import PRESET_LOTS, Lot

CONNECTIONS = ("open", "short", "load", "thru", "device")
NOISE_FLOOR_DB = -90.0


@dataclass(frozen=True)
class Disturbance:
    """A fixture that moved: a short extra line at port 1 the last calibration never saw."""

    delay_s: float = 20e-12
    z_ohm: float = 56.0
    loss_db_at_1ghz: float = 0.0

    def s(self, freq_hz: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        gl = coax_gamma_l(freq_hz, self.delay_s, self.loss_db_at_1ghz)
        s11, s21 = uniform_line(self.z_ohm, gl, 50.0)
        return s11, s21, s11


def noise_sigma(power_dbm: float, if_bandwidth_hz: float, averaging: int) -> float:
    """Per-component noise sigma of a raw value (see the module docstring)."""
    floor = np.sqrt(10.0 ** (NOISE_FLOOR_DB / 10.0) / 2.0)
    return float(floor * 10.0 ** (-power_dbm / 20.0) * np.sqrt(if_bandwidth_hz / 1e3)
                 / np.sqrt(max(int(averaging), 1)))


class Bench:
    """The simulated world; thread-safe (the control channel and sessions share it)."""

    def __init__(self, kit: str | Path = DEFAULT_KIT, seed: int = 1, noise: bool = False,
                 clock: SimClock | None = None, device: str = "patch-2g45",
                 lot: str = "patch-2g45") -> None:
        self._lock = threading.RLock()
        self.kit = load_kit(kit)
        self.clock = clock or SimClock()
        self.noise = bool(noise)
        self.version = 0
        self._device: Device = make_device(device)
        self._connected = "device"
        self._lot = PRESET_LOTS.get(lot) or Lot(lot, lot)
        self._serial: str | None = None
        self._drift = Drift()
        self._disturbance: Disturbance | None = None
        self._rng = np.random.default_rng(seed)
        self._terms_cache: tuple[Any, dict[str, np.ndarray]] | None = None
        self.last_sweep: dict[str, Any] = {}

    # -- fixture -------------------------------------------------------------------
    @property
    def connected(self) -> str:
        return self._connected

    def connect(self, what: str) -> None:
        """Present a standard or the device at the reference planes."""
        what = str(what).lower()
        if what == "dut":
            what = "device"
        if what not in CONNECTIONS:
            raise SimError(f"fixture: cannot connect {what!r}; allowed: {', '.join(CONNECTIONS)}")
        with self._lock:
            self._connected = what
            self.version += 1

    def disturb(self, delay_s: float = 20e-12, z_ohm: float = 56.0,
                loss_db_at_1ghz: float = 0.0) -> None:
        """Move the fixture: an extra line at port 1 that earlier calibrations don't know."""
        if not (delay_s >= 0 and z_ohm > 0 and loss_db_at_1ghz >= 0):
            raise SimError("disturb: need delay_s >= 0, z_ohm > 0, loss_db_at_1ghz >= 0")
        with self._lock:
            self._disturbance = Disturbance(float(delay_s), float(z_ohm), float(loss_db_at_1ghz))
            self.version += 1

    def restore(self) -> None:
        """Put the fixture back where it was calibrated."""
        with self._lock:
            self._disturbance = None
            self.version += 1

    # -- device, lot, drift ------------------------------------------------------------
    @property
    def device(self) -> Device:
        return self._device

    def set_device(self, kind: str, **params: Any) -> Device:
        """Put a new device (kind or preset, with parameter overrides) in the fixture."""
        device = make_device(kind, **params)
        with self._lock:
            self._device, self._serial = device, None
            self.version += 1
        return device

    @property
    def lot(self) -> Lot:
        return self._lot

    def set_lot(self, name: str = "patch-2g45", kind: str | None = None,
                nominal: dict | None = None, spread: dict | None = None, seed: int = 0,
                golden: str = "GOLDEN") -> Lot:
        """Choose a preset lot by name, or define one (kind, nominal, spread)."""
        if kind is None and nominal is None and spread is None and name in PRESET_LOTS:
            lot = PRESET_LOTS[name]
            lot = Lot(lot.name, lot.kind, dict(lot.nominal), dict(lot.spread), int(seed), golden)
        else:
            lot = Lot(name, kind or name, dict(nominal or {}), dict(spread or {}), int(seed),
                      golden)
        with self._lock:
            self._lot = lot
            self.version += 1
        return lot

    def select_unit(self, serial: str) -> dict[str, Any]:
        """Put the lot's unit with this serial in the fixture; returns its parameters."""
        serial = str(serial)
        params = self._lot.unit(serial)
        kind = params.pop("kind")
        self.set_device(kind, **params)
        with self._lock:
            self._serial = serial
        return {"kind": kind, **params}

    @property
    def drift(self) -> Drift:
        return self._drift

    def set_drift(self, **settings: float) -> Drift:
        """Replace the drift settings (see ``simulators.drift``); no arguments turns it off."""
        try:
            drift = Drift(**{k: float(v) for k, v in settings.items()})
        except TypeError as exc:
            raise SimError(f"drift: {exc}; allowed: {', '.join(asdict(Drift()))}") from None
        except ValueError:
            raise SimError(f"drift: values must be numbers, got {settings!r}") from None
        with self._lock:
            self._drift = drift
            self.version += 1
        return drift

    # -- ground truth ------------------------------------------------------------------
    def truth(self, freq_hz: np.ndarray, at_s: float | None = None) -> np.ndarray:
        """The device's true S (n, p, p), drift included at ``at_s`` (default: now), no jitter."""
        f = _grid(freq_hz)
        with self._lock:
            device, drift = self._device, self._drift
        t = self.clock.now() if at_s is None else at_s
        return shifted(device, drift.offset_hz(t)).s(f)

    def error_terms(self, freq_hz: np.ndarray, disturbed: bool = True) -> dict[str, np.ndarray]:
        """The 12 error terms at the reference planes (see ``simulators.errorbox``)."""
        f = _grid(freq_hz)
        with self._lock:
            dist = self._disturbance if disturbed else None
        return self._terms(f, dist)

    def switch_terms(self, freq_hz: np.ndarray, disturbed: bool = True
                     ) -> tuple[np.ndarray, np.ndarray]:
        """The switch terms (Γf = a2/b2, Γr = a1/b1) at ``freq_hz``, noise-free."""
        return switch_terms(self.error_terms(freq_hz, disturbed))

    def switch_readings(self, freq_hz: np.ndarray, raw: np.ndarray, power_dbm: float = 0.0,
                        if_bandwidth_hz: float = 1e3, averaging: int = 1,
                        output: bool = True) -> np.ndarray:
        """The switch terms (n, 2) = (a2/b2, a1/b1) as read in the sweep that gave ``raw``
        (its (n, 2, 2) raw S sets the received level; see the module docstring)."""
        f = _grid(freq_hz)
        with self._lock:
            dist = self._disturbance
            sigma = self.noise_sigma(power_dbm, if_bandwidth_hz, averaging)
            noise = None
            if sigma > 0:
                noise = sigma * (self._rng.standard_normal((f.shape[0], 2))
                                 + 1j * self._rng.standard_normal((f.shape[0], 2)))
        out = np.zeros((f.shape[0], 2), dtype=np.complex128)
        if output:
            out[:, 0], out[:, 1] = switch_terms(self._terms(f, dist))
        if noise is not None:
            level = np.abs(np.stack([raw[:, 1, 0], raw[:, 0, 1]], axis=1))
            out += noise / np.maximum(level, sigma)
        return out

    def standard(self, name: str, freq_hz: np.ndarray) -> np.ndarray:
        """What the fixture presents (n, 2, 2) for a standard, from the cal kit file."""
        f = _grid(freq_hz)
        if name == "thru":
            return self.kit.thru(f)
        if name not in ("open", "short", "load"):
            raise SimError(f"fixture: no standard {name!r}; allowed: open, short, load, thru")
        g = self.kit.reflection(name, f)
        s = np.zeros((f.shape[0], 2, 2), dtype=np.complex128)
        s[:, 0, 0] = g
        s[:, 1, 1] = g
        return s

    # -- measuring ---------------------------------------------------------------------
    def noise_sigma(self, power_dbm: float, if_bandwidth_hz: float, averaging: int) -> float:
        return noise_sigma(power_dbm, if_bandwidth_hz, averaging) if self.noise else 0.0

    def sweep(self, freq_hz: np.ndarray, power_dbm: float = 0.0, if_bandwidth_hz: float = 1e3,
              averaging: int = 1, output: bool = True) -> np.ndarray:
        """One sweep's raw S (n, 2, 2), as the receivers see it."""
        f = _grid(freq_hz)
        with self._lock:
            t = self.clock.now()
            connected, device, drift = self._connected, self._device, self._drift
            dist, serial = self._disturbance, self._serial
            shift = drift.offset_hz(t)
            if drift.jitter_hz > 0:
                shift += drift.jitter_hz * float(self._rng.standard_normal())
            sigma = self.noise_sigma(power_dbm, if_bandwidth_hz, averaging)
            noise = None
            if sigma > 0:
                shape = (f.shape[0], 2, 2)
                noise = sigma * (self._rng.standard_normal(shape)
                                 + 1j * self._rng.standard_normal(shape))
            self.last_sweep = {"t_s": t, "connected": connected, "serial": serial,
                               "shift_hz": shift, "temperature_c": drift.temperature_c(t),
                               "noise_sigma": sigma}
        if not output:
            raw = np.zeros((f.shape[0], 2, 2), dtype=np.complex128)
        else:
            raw = measure(self._terms(f, dist), self._presented(f, connected, device, shift))
        if noise is not None:
            raw += noise
        return raw

    def _presented(self, f: np.ndarray, connected: str, device: Device, shift: float) -> np.ndarray:
        if connected != "device":
            return self.standard(connected, f)
        s = shifted(device, shift).s(f)
        if s.shape[1] == 2:
            return s
        out = np.zeros((f.shape[0], 2, 2), dtype=np.complex128)
        out[:, 0, 0] = s[:, 0, 0]
        return out

    def _terms(self, f: np.ndarray, dist: Disturbance | None) -> dict[str, np.ndarray]:
        key = (f.shape[0], float(f[0]), float(f[-1]), float(f[f.shape[0] // 2]), dist)
        cached = self._terms_cache
        if cached is not None and cached[0] == key:
            return cached[1]
        terms = reference_plane_terms(f, dist.s(f) if dist is not None else None)
        self._terms_cache = (key, terms)
        return terms

    # -- reporting ---------------------------------------------------------------------
    def state(self) -> dict[str, Any]:
        """Everything about the world as JSON-able values."""
        with self._lock:
            return {
                "connected": self._connected,
                "device": device_params(self._device),
                "serial": self._serial,
                "lot": self._lot.describe(),
                "kit": self.kit.name,
                "noise": self.noise,
                "drift": asdict(self._drift),
                "disturbance": asdict(self._disturbance) if self._disturbance else None,
                "clock_s": self.clock.now(),
                "clock_rate": self.clock.rate,
                "last_sweep": dict(self.last_sweep),
                "version": self.version,
            }


def _grid(freq_hz: np.ndarray) -> np.ndarray:
    f = np.atleast_1d(np.asarray(freq_hz, dtype=np.float64))
    if f.ndim != 1 or not np.all(f > 0):
        raise SimError("bench: frequencies must be a 1-D array of values > 0 Hz")
    return f
