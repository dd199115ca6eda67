"""Cal kit definition files (configs/calkits/*.yaml): loading, validation, lookups.

Schema (see DEVELOPERS.md, "Cal kit files")::

    kit: generic-sma-50
    description: free text
    z0: 50 ohm
    frequency: {min: 0 Hz, max: 18 GHz}
    standards:
      open:  {offset: {delay, loss_gohm_per_s, z0}, capacitance: {c0, c1, c2, c3}}
      short: {offset: {...}, inductance: {l0, l1, l2, l3}}
      load:  {offset: {...}, impedance: {r, x}}
      thru:  {offset: {...}}

Polynomial coefficients are plain numbers in the usual table scaling (c0 fF, c1 1e-27 F/Hz,
c2 1e-36 F/Hz², c3 1e-45 F/Hz³; l0 pH, l1 1e-24 H/Hz, l2 1e-33 H/Hz², l3 1e-42 H/Hz³);
offset loss is in GΩ/s (its value at 1 GHz). Missing optional fields are ideal (zero).
Further standards (a second offset short, a check mismatch) may be added under any other
name with ``type: open | short | load | thru``.
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from types import MappingProxyType

import numpy as np

from acquire.calibration.standards import KINDS, Offset, Standard
from acquire.errors import CalError, ConfigError
from acquire.library import find_config
from acquire.units import format_frequency
from acquire.yamlfile import Node, load_yaml

C_SCALE = (1e-15, 1e-27, 1e-36, 1e-45)
L_SCALE = (1e-12, 1e-24, 1e-33, 1e-42)
_TERMINATION_KEY = {"open": "capacitance", "short": "inductance", "load": "impedance"}


@dataclass(frozen=True)
class CalKit:
    """A validated cal kit: system impedance, usable range and standard models."""

    name: str
    description: str
    z0_ohm: float
    min_hz: float
    max_hz: float
    standards: Mapping[str, Standard]
    path: Path | None = None
    sha256: str = ""

    def standard(self, name: str) -> Standard:
        """The standard called ``name``; ``CalError`` naming the kit if absent."""
        try:
            return self.standards[name]
        except KeyError:
            have = ", ".join(self.standards) or "none"
            raise CalError(f"cal kit {self.name}: no standard '{name}' (has: {have})") from None

    def check_range(self, freq_hz: np.ndarray) -> None:
        """Refuse frequencies outside the kit's usable range."""
        f = np.asarray(freq_hz, dtype=np.float64)
        if f.size == 0:
            return
        lo, hi = float(f.min()), float(f.max())
        if lo < self.min_hz or hi > self.max_hz:
            raise CalError(
                f"cal kit {self.name} is specified from {format_frequency(self.min_hz)} to "
                f"{format_frequency(self.max_hz)}; the sweep covers {format_frequency(lo)} to "
                f"{format_frequency(hi)}: use a kit for this band"
            )

    def reflection(self, name: str, freq_hz: np.ndarray) -> np.ndarray:
        """Actual reflection of a reflect standard on ``freq_hz`` (range-checked)."""
        self.check_range(freq_hz)
        return self.standard(name).reflection(freq_hz, self.z0_ohm)

    def thru_s(self, name: str, freq_hz: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(S11, S21) of a thru standard on ``freq_hz`` (range-checked)."""
        self.check_range(freq_hz)
        return self.standard(name).thru_s(freq_hz, self.z0_ohm)

    def names_of_kind(self, kind: str) -> list[str]:
        return [n for n, s in self.standards.items() if s.kind == kind]


def load_kit(ref: str | Path, base_dir: Path | None = None) -> CalKit:
    """Load a kit by bare name (``generic-sma-50``) or path; one-line errors."""
    path = find_config("calkits", str(ref), base_dir)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise ConfigError(f"cal kit {path}: cannot read ({exc.strerror})") from None
    raw = load_yaml(path, "cal kit")
    root = Node(raw, f"cal kit {path}", base_dir=path.parent)
    kit = parse_kit(root)
    return replace(kit, path=path, sha256=hashlib.sha256(data).hexdigest())


def parse_kit(root: Node) -> CalKit:
    """Validate a loaded kit document (a ``Node``) and build the ``CalKit``."""
    root.mapping(("kit", "description", "z0", "frequency", "standards"),
                 required=("kit", "frequency", "standards"))
    name = root["kit"].text()
    z0 = root["z0"].quantity("impedance", 50.0, lo=1e-3)
    freq = root["frequency"].mapping(("min", "max"), required=("min", "max"))
    min_hz = freq["min"].quantity("frequency", lo=0.0)
    max_hz = freq["max"].quantity("frequency", lo=0.0)
    if max_hz <= min_hz:
        freq["max"].fail(f"must be above frequency.min ({format_frequency(min_hz)})")
    standards_node = root["standards"]
    standards = {}
    for std_name, node in standards_node.items():
        standards[std_name] = _standard(std_name, node, z0)
    if not standards:
        standards_node.fail("must define at least one standard")
    return CalKit(name, root["description"].text(""), z0, min_hz, max_hz,
                  MappingProxyType(standards))


def _standard(name: str, node: Node, z0: float) -> Standard:
    if node.value is None:  # "open:" with nothing after it: an ideal flush standard
        node = Node({}, node.source, node.path, node.error, node.base_dir)
    node.mapping(("type", "offset", "capacitance", "inductance", "impedance"))
    if node["type"].present:
        kind = node["type"].text(choices=KINDS)
    elif name in KINDS:
        kind = name
    else:
        node["type"].fail(f"is required for a standard not named {', '.join(KINDS)}")
    for kind_of, key in _TERMINATION_KEY.items():
        if node[key].present and kind != kind_of:
            node[key].fail(f"only {_a(kind_of)} standard has '{key}'; this one is {_a(kind)}")
    offset = node["offset"].mapping(("delay", "loss_gohm_per_s", "z0"), optional=True)
    std_offset = Offset(
        delay_s=offset["delay"].quantity("time", 0.0, lo=0.0),
        loss_ohm_per_s=offset["loss_gohm_per_s"].number(0.0, lo=0.0) * 1e9,
        z0_ohm=offset["z0"].quantity("impedance", z0, lo=1e-3),
    )
    caps = _polynomial(node["capacitance"], ("c0", "c1", "c2", "c3"), C_SCALE)
    inds = _polynomial(node["inductance"], ("l0", "l1", "l2", "l3"), L_SCALE)
    imp = node["impedance"].mapping(("r", "x"), optional=True)
    r = imp["r"].quantity("impedance", z0, lo=0.0)
    x = imp["x"].quantity("impedance", 0.0)
    return Standard(name, kind, std_offset, caps, inds, complex(r, x))


def _polynomial(node: Node, keys: tuple[str, ...], scale: tuple[float, ...]) -> tuple:
    node.mapping(keys, optional=True)
    return tuple(node[k].number(0.0) * s for k, s in zip(keys, scale, strict=True))


def _a(word: str) -> str:
    return f"an {word}" if word[0] in "aeiou" else f"a {word}"
