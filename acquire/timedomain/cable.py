"""Cable files: velocity factor and loss per length of a transmission line (our format).

```yaml
cable: solid-pe-50             # name; our own words, no product or maker names
description: free text
z0: 50 ohm                     # optional, default 50 ohm
velocity_factor: 0.66          # 0 < VF <= 1
loss:                          # optional: attenuation per metre at some frequencies
  - {frequency: 100 MHz, per_m: 0.07 dB}
  - {frequency: 1 GHz, per_m: 0.24 dB}
```

Between and beyond the listed frequencies the loss follows ``a * sqrt(f) + b * f``
(conductor loss grows as the square root of frequency, dielectric loss in proportion to
it: Pozar, Microwave Engineering, 4th ed., sec. 2.7), fitted to the points by least
squares with a, b >= 0; one point fixes ``a`` alone. Bare names are looked up next to the
plan, then in ``configs/cables/``.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from acquire.errors import ConfigError
from acquire.yamlfile import Node, load_yaml

MAX_LOSS_POINTS = 64


@dataclass(frozen=True)
class Cable:
    """A validated cable file."""

    name: str
    description: str
    z0: float
    velocity_factor: float
    loss_points: tuple[tuple[float, float], ...]  # (frequency Hz, dB per metre)
    source: str = ""

    def loss_db_per_m(self, freq_hz: float) -> float | None:
        """Attenuation per metre at ``freq_hz`` from the fitted model; None without data."""
        if not self.loss_points:
            return None
        a, b = _fit(self.loss_points)
        return float(a * np.sqrt(freq_hz) + b * freq_hz)


def load_cable(ref: str | Path, base_dir: Path | None = None) -> Cable:
    """Load a cable file by bare name or path; errors name the file and key."""
    from acquire.library import find_config

    path = find_config("cables", str(ref), base_dir)
    raw = load_yaml(path, "cable", ConfigError)
    return parse_cable(Node(raw, f"cable {path}", base_dir=path.parent), source=str(path))


def parse_cable(root: Node, *, source: str = "") -> Cable:
    """Validate a loaded cable document (see the module notes for the format)."""
    root.mapping(("cable", "description", "z0", "velocity_factor", "loss"),
                 required=("cable", "velocity_factor"))
    vf = root["velocity_factor"].number(lo=0.01, hi=1.0)
    points = []
    if root["loss"].present:
        items = root["loss"].elements(min_len=1)
        if len(items) > MAX_LOSS_POINTS:
            root["loss"].fail(f"holds {len(items)} points; at most {MAX_LOSS_POINTS}")
        for item in items:
            item.mapping(("frequency", "per_m"), required=("frequency", "per_m"))
            freq = item["frequency"].quantity("frequency", lo=1.0)
            points.append((freq, item["per_m"].quantity("decibel", lo=0.0, hi=100.0)))
        freqs = [p[0] for p in points]
        if len(set(freqs)) != len(freqs):
            root["loss"].fail("lists the same frequency twice")
    return Cable(
        name=root["cable"].text(),
        description=root["description"].text(""),
        z0=root["z0"].quantity("impedance", 50.0, lo=1e-3),
        velocity_factor=vf,
        loss_points=tuple(sorted(points)),
        source=source,
    )


def _fit(points: tuple[tuple[float, float], ...]) -> tuple[float, float]:
    """Least-squares ``a, b >= 0`` of ``loss = a sqrt(f) + b f`` through the points."""
    f = np.array([p[0] for p in points])
    loss = np.array([p[1] for p in points])
    basis = np.column_stack([np.sqrt(f), f])
    candidates = [(float(np.sum(loss * basis[:, 0]) / np.sum(basis[:, 0] ** 2)), 0.0)]
    if len(points) > 1:
        candidates.append((0.0, float(np.sum(loss * f) / np.sum(f * f))))
        both = np.linalg.lstsq(basis, loss, rcond=None)[0]
        if np.all(both >= 0):
            candidates.append((float(both[0]), float(both[1])))

    def residual(ab: tuple[float, float]) -> float:
        return float(np.sum((basis @ np.array(ab) - loss) ** 2))

    return min(candidates, key=residual)
