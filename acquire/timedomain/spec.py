"""Distance-to-fault settings as a plan, a distance mask or the command line give them.

Keys (plan check ``distance:``, distance mask files, and the same names on the command
line of ``sweepd dtf``)::

    velocity_factor: 0.66      # else the cable file's; one of the two is required
    cable: solid-pe-50         # cable file: velocity factor and loss per metre
    loss_per_m: 0.12 dB        # loss per metre at the band's centre (overrides the cable's)
    compensate_loss: true      # add back the round-trip loss (default: when a loss is known)
    mode: bandpass             # bandpass (any grid) | lowpass (harmonic grid; adds the step)
    window: kaiser-6           # none | hann | kaiser-<beta>
    padding: 8                 # zero padding: n_fft >= padding * points (power of two)
    floor: -50 dB              # peaks below this level are not listed
    parameter: S11             # the reflection to transform
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from acquire.errors import ConfigError
from acquire.sweep import Sweep
from acquire.timedomain.cable import Cable, load_cable
from acquire.timedomain.distance import (
    DistanceProfile,
    LineSettings,
    band_centre_hz,
    distance_profile,
)
from acquire.timedomain.peaks import DEFAULT_FLOOR_DB
from acquire.timedomain.transform import MODES, TransformError, TransformSettings
from acquire.timedomain.windows import DEFAULT_WINDOW, WindowError, check_window
from acquire.yamlfile import Node, show

SETTING_KEYS = ("velocity_factor", "cable", "loss_per_m", "compensate_loss", "mode", "window",
                "padding", "floor", "parameter")
MAX_PADDING = 64
_FIELDS = {"cable": "cable", "velocity_factor": "velocity_factor",
           "loss_per_m": "loss_db_per_m", "compensate_loss": "compensate",
           "floor": "floor_db", "parameter": "parameter"}
_TRANSFORM = ("mode", "window", "padding")


@dataclass(frozen=True)
class DtfSpec:
    """Everything needed to turn a reflection sweep into a distance profile."""

    velocity_factor: float | None = None
    cable: Cable | None = None
    loss_db_per_m: float | None = None
    compensate: bool | None = None  # None: compensate when a loss is known
    transform: TransformSettings = field(default_factory=TransformSettings)
    floor_db: float = DEFAULT_FLOOR_DB
    parameter: str = "S11"

    def merged(self, override: DtfSpec, given: frozenset[str]) -> DtfSpec:
        """This spec with the settings named in ``given`` (file keys) from ``override``."""
        values = {_FIELDS[k]: getattr(override, _FIELDS[k]) for k in given if k in _FIELDS}
        steps = {k: getattr(override.transform, k) for k in _TRANSFORM if k in given}
        return replace(self, transform=replace(self.transform, **steps), **values)

    def line(self, freq_hz: np.ndarray, z0: float = 50.0) -> LineSettings:
        """The line model for a sweep: velocity factor and loss at the band's centre."""
        vf = self.velocity_factor
        if vf is None and self.cable is not None:
            vf = self.cable.velocity_factor
        if vf is None:
            raise ConfigError("distance to fault needs a velocity factor: give velocity_factor "
                              "(--velocity) or a cable file with one")
        loss = self.loss_db_per_m
        source = "loss_per_m" if loss is not None else None
        if loss is None and self.cable is not None:
            loss = self.cable.loss_db_per_m(band_centre_hz(freq_hz, self.transform.mode))
            source = f"cable {self.cable.name}" if loss is not None else None
        compensate = self.compensate if self.compensate is not None else loss is not None
        if compensate and loss is None:
            raise ConfigError("compensate_loss is on but no loss per metre is known: give "
                              "loss_per_m (--loss-per-m) or a cable file with a loss table")
        return LineSettings(vf, loss, source, compensate, z0)

    def profile(self, sweep: Sweep) -> DistanceProfile:
        """The distance profile of this spec's reflection parameter in ``sweep``."""
        i = int(self.parameter[1])
        if i > sweep.ports:
            raise TransformError(f"needs {self.parameter} but the sweep has {sweep.ports} port(s)")
        return self.profile_of(sweep.freq_hz, sweep.param(self.parameter), sweep.z0[i - 1])

    def profile_of(self, freq_hz: np.ndarray, gamma: np.ndarray,
                   z0: float = 50.0) -> DistanceProfile:
        return distance_profile(freq_hz, gamma, self.line(freq_hz, z0), self.transform)

    def to_dict(self) -> dict[str, Any]:
        return {
            "parameter": self.parameter,
            "velocity_factor": self.velocity_factor,
            "cable": self.cable.name if self.cable else None,
            "loss_per_m_db": self.loss_db_per_m,
            "compensate_loss": self.compensate,
            **self.transform.to_dict(),
            "floor_db": self.floor_db,
        }


def parse_spec(node: Node) -> tuple[DtfSpec, frozenset[str]]:
    """Read the setting keys of a mapping ``node``: the spec and the keys it gave."""
    given = frozenset(k for k in SETTING_KEYS if node[k].present)
    cable = None
    if node["cable"].present:
        try:
            cable = load_cable(node["cable"].text(), node.base_dir)
        except ConfigError as exc:
            node["cable"].fail(str(exc))
    window = node["window"].text(DEFAULT_WINDOW)
    try:
        check_window(window)
    except WindowError as exc:
        node["window"].fail(str(exc))
    spec = DtfSpec(
        velocity_factor=node["velocity_factor"].number(None, lo=0.01, hi=1.0),
        cable=cable,
        loss_db_per_m=node["loss_per_m"].quantity("decibel", None, lo=0.0, hi=100.0),
        compensate=node["compensate_loss"].boolean(None),
        transform=TransformSettings(
            node["mode"].text("bandpass", choices=MODES), window,
            node["padding"].integer(8, lo=1, hi=MAX_PADDING),
        ),
        floor_db=node["floor"].quantity("decibel", DEFAULT_FLOOR_DB, lo=-200.0, hi=0.0),
        parameter=_reflection(node["parameter"]),
    )
    return spec, given


def _reflection(node: Node) -> str:
    text = node.text("S11").strip().upper()
    if len(text) != 3 or text[0] != "S" or text[1] != text[2] or text[1] not in "123456789":
        node.fail(f"must be a reflection parameter such as S11 or S22, got {show(node.value)}")
    return text
