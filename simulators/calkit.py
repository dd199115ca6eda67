"""Cal kit files (configs/calkits/*.yaml) and the actual reflection of each standard.

The simulator reads the kit itself with ``yaml.safe_load`` (it may not use the host's
loader) and presents standards whose reflection follows the kit's offset-line model, so a
host-side calibration with the same kit recovers the device's true reflection.

Offset line, low-loss coaxial approximation (Pozar, Microwave Engineering, 4th ed., ch. 2,
with the offset delay/loss/impedance parametrisation of a coaxial standard), per frequency:

    s   = √(f / 1 GHz)
    αl  = L_off·τ/(2·Z_off)·s              βl = 2πfτ + αl        γl = αl + jβl
    Z_c = Z_off + (1 − j)·L_off/(4πf)·s
    Z_in = Z_c·(Z_T + Z_c·tanh γl)/(Z_c + Z_T·tanh γl),   Γ = (Z_in − Z_r)/(Z_in + Z_r)

L_off is the file's ``loss_gohm_per_s`` × 1e9 Ω/s. Terminations: open C(f) = C0 + C1 f +
C2 f² + C3 f³ (file units fF, 1e-27 F/Hz, 1e-36 F/Hz², 1e-45 F/Hz³), short L(f) likewise
(pH, 1e-24, 1e-33, 1e-42), load R + jX. The open is computed through its admittance so a
zero capacitance is an ideal open. Missing fields mean ideal (zero offset, zero C/L, a load
equal to the kit's z0).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from simulators.errors import SimError
from simulators.lines import reflection, two_port, uniform_line
from simulators.quantities import plain_number, quantity
from sweepd_configs import shipped_dir

KIT_DIR = shipped_dir("calkits")
DEFAULT_KIT = "generic-sma-50"

_C_SCALE = (1e-15, 1e-27, 1e-36, 1e-45)
_L_SCALE = (1e-12, 1e-24, 1e-33, 1e-42)
_STANDARDS = ("open", "short", "load", "thru")


@dataclass(frozen=True)
class Offset:
    """Offset line of a standard: one-way delay (s), loss (Ω/s at 1 GHz), impedance (Ω)."""

    delay_s: float = 0.0
    loss_ohm_per_s: float = 0.0
    z_ohm: float = 50.0

    def line(self, freq_hz: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Characteristic impedance Z_c and γl of the offset at each frequency."""
        f = np.asarray(freq_hz, dtype=np.float64)
        s = np.sqrt(f / 1e9)
        alpha_l = self.loss_ohm_per_s * self.delay_s / (2.0 * self.z_ohm) * s
        beta_l = 2.0 * np.pi * f * self.delay_s + alpha_l
        zc = self.z_ohm + (1.0 - 1.0j) * self.loss_ohm_per_s / (4.0 * np.pi * f) * s
        return zc, alpha_l + 1j * beta_l


@dataclass(frozen=True)
class CalKit:
    """A loaded kit: name, reference impedance and the four standards' definitions."""

    name: str
    source: str
    z0: float
    offsets: dict[str, Offset]
    open_c: tuple[float, float, float, float]
    short_l: tuple[float, float, float, float]
    load_z: complex

    def reflection(self, name: str, freq_hz: np.ndarray) -> np.ndarray:
        """Actual Γ of the open, short or load at ``freq_hz`` (n,)."""
        f = np.asarray(freq_hz, dtype=np.float64)
        w = 2.0 * np.pi * f
        offset = self.offsets[name]
        if name == "open":
            c = np.polyval(self.open_c[::-1], f)
            return _terminated(offset, f, y_term=1j * w * c, zr=self.z0)
        if name == "short":
            ind = np.polyval(self.short_l[::-1], f)
            return _terminated(offset, f, z_term=1j * w * ind, zr=self.z0)
        if name == "load":
            return _terminated(offset, f, z_term=np.full(f.shape, self.load_z), zr=self.z0)
        raise SimError(f"cal kit {self.source}: no reflection standard {name!r}")

    def thru(self, freq_hz: np.ndarray) -> np.ndarray:
        """S (n, 2, 2) of the thru: its offset line referenced to the kit's z0."""
        f = np.asarray(freq_hz, dtype=np.float64)
        offset = self.offsets["thru"]
        if offset.delay_s == 0.0:
            zeros = np.zeros(f.shape, dtype=np.complex128)
            return two_port(zeros, zeros + 1.0)
        zc, gl = offset.line(f)
        s11, s21 = uniform_line(zc, gl, self.z0)
        return two_port(s11, s21)


def _terminated(offset: Offset, f: np.ndarray, zr: float, z_term: np.ndarray | None = None,
                y_term: np.ndarray | None = None) -> np.ndarray:
    """Γ of a termination (impedance or admittance) behind the offset line."""
    if offset.delay_s == 0.0:  # a loss entry with zero delay is ignored
        if y_term is not None:
            return (1.0 - zr * y_term) / (1.0 + zr * y_term)
        return reflection(z_term, zr)
    zc, gl = offset.line(f)
    t = np.tanh(gl)
    if y_term is not None:
        z_in = zc * (1.0 + zc * t * y_term) / (zc * y_term + t)
    else:
        z_in = zc * (z_term + zc * t) / (zc + z_term * t)
    return reflection(z_in, zr)


def kit_path(ref: str | Path) -> Path:
    """A bare kit name → the shipped file; anything else is a path."""
    text = str(ref)
    if "/" not in text and not text.endswith((".yaml", ".yml")):
        return KIT_DIR / f"{text}.yaml"
    return Path(text).expanduser()


def load_kit(ref: str | Path = DEFAULT_KIT) -> CalKit:
    """Load and validate a cal kit file; errors name the file and key path."""
    import yaml

    path = kit_path(ref)
    src = f"cal kit {path}"
    try:
        doc = yaml.safe_load(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise SimError(f"{src}: file not found") from None
    except (OSError, UnicodeDecodeError, yaml.YAMLError) as exc:
        raise SimError(f"{src}: cannot read: {str(exc).splitlines()[0]}") from None
    doc = _mapping(doc, src, "", ("kit", "description", "z0", "frequency", "standards"))
    z0 = quantity(doc.get("z0", 50.0), "impedance", f"{src}: z0")
    stds = _mapping(doc.get("standards", {}), src, "standards", _STANDARDS)
    offsets: dict[str, Offset] = {}
    for name in _STANDARDS:
        extra = {"open": ("capacitance",), "short": ("inductance",), "load": ("impedance",)}
        std = _mapping(stds.get(name) or {}, src, f"standards.{name}",
                       ("offset", *extra.get(name, ())))
        offsets[name] = _offset(std.get("offset") or {}, src, f"standards.{name}.offset", z0)
    open_c = _poly(stds.get("open") or {}, "capacitance", ("c0", "c1", "c2", "c3"), _C_SCALE, src)
    short_l = _poly(stds.get("short") or {}, "inductance", ("l0", "l1", "l2", "l3"), _L_SCALE, src)
    load = _mapping((stds.get("load") or {}).get("impedance") or {}, src,
                    "standards.load.impedance", ("r", "x"))
    where = f"{src}: standards.load.impedance"
    load_z = complex(quantity(load.get("r", z0), "impedance", f"{where}.r"),
                     quantity(load.get("x", 0.0), "impedance", f"{where}.x"))
    return CalKit(str(doc.get("kit", path.stem)), str(path), z0, offsets, open_c, short_l, load_z)


def _mapping(value: object, src: str, key: str, allowed: tuple[str, ...]) -> dict:
    where = f"{src}: {key}" if key else src
    if not isinstance(value, dict):
        raise SimError(f"{where}: must be a mapping, got {type(value).__name__}")
    for k in value:
        if k not in allowed:
            raise SimError(f"{where}: unknown key {k!r}; allowed: {', '.join(allowed)}")
    return value


def _offset(value: object, src: str, key: str, z0: float) -> Offset:
    doc = _mapping(value, src, key, ("delay", "loss_gohm_per_s", "z0"))
    offset = Offset(
        delay_s=quantity(doc.get("delay", 0.0), "time", f"{src}: {key}.delay"),
        loss_ohm_per_s=plain_number(doc.get("loss_gohm_per_s", 0.0),
                                    f"{src}: {key}.loss_gohm_per_s") * 1e9,
        z_ohm=quantity(doc.get("z0", z0), "impedance", f"{src}: {key}.z0"),
    )
    if offset.delay_s < 0 or offset.loss_ohm_per_s < 0 or offset.z_ohm <= 0:
        raise SimError(f"{src}: {key}: delay and loss must be >= 0 and z0 > 0")
    return offset


def _poly(std: dict, field: str, names: tuple[str, ...], scale: tuple[float, ...],
          src: str) -> tuple[float, float, float, float]:
    key = f"standards.{'open' if field == 'capacitance' else 'short'}.{field}"
    doc = _mapping(std.get(field) or {}, src, key, names)
    values = [plain_number(doc.get(n, 0.0), f"{src}: {key}.{n}") * k
              for n, k in zip(names, scale, strict=True)]
    return (values[0], values[1], values[2], values[3])
