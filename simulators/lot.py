"""A production lot of simulated units with manufacturing spread.

Each serial maps deterministically to its own parameters: SHA-256 of (lot name, seed,
serial) seeds a numpy generator, which draws each spread parameter from a normal
distribution (mean, sigma) in sorted parameter order. The same serial always gives the
same unit, in any process. The golden serial gets the nominal parameters exactly. Drawn
values are clipped to stay physical (resonance, Q and resistance ≥ 1 % of the mean).
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from simulators.errors import SimError

GOLDEN = "GOLDEN"


@dataclass(frozen=True)
class Lot:
    """``nominal`` device parameters (a kind or preset plus overrides) and per-parameter spread.

    ``spread`` maps a parameter to its sigma (mean = nominal) or to {"mean": m, "sigma": s}.
    """

    name: str = "patch-2g45"
    kind: str = "patch-2g45"
    nominal: dict[str, Any] = field(default_factory=dict)
    spread: dict[str, Any] = field(default_factory=dict)
    seed: int = 0
    golden: str = GOLDEN

    def __post_init__(self) -> None:
        from simulators.devices import device_params, make_device

        base = device_params(make_device(self.kind, **self.nominal))
        for key, value in self.spread.items():
            if key not in base or isinstance(base[key], str) or key == "kind":
                raise SimError(f"lot {self.name}: spread.{key}: not a numeric parameter of "
                               f"a {base['kind']}")
            _, sigma = _mean_sigma(value, base[key], f"lot {self.name}: spread.{key}")
            if sigma < 0:
                raise SimError(f"lot {self.name}: spread.{key}.sigma must be >= 0")

    def unit(self, serial: str) -> dict[str, Any]:
        """Device parameters (kind included) of the unit with this serial."""
        from simulators.devices import device_params, make_device

        base = device_params(make_device(self.kind, **self.nominal))
        if serial == self.golden:
            return base
        digest = hashlib.sha256(f"{self.name}\0{self.seed}\0{serial}".encode()).digest()
        rng = np.random.default_rng(int.from_bytes(digest[:8], "little"))
        params = dict(base)
        for key in sorted(self.spread):
            mean, sigma = _mean_sigma(self.spread[key], base[key], key)
            value = float(rng.normal(mean, sigma))
            if key in ("f0_hz", "center_hz", "q", "r_ohm", "bandwidth_hz", "z_ohm"):
                value = max(value, 0.01 * abs(mean))
            params[key] = value
        return params

    def describe(self) -> dict[str, Any]:
        return {"name": self.name, "kind": self.kind, "nominal": dict(self.nominal),
                "spread": dict(self.spread), "seed": self.seed, "golden": self.golden}


def _mean_sigma(value: Any, nominal: float, where: str) -> tuple[float, float]:
    if isinstance(value, dict):
        unknown = set(value) - {"mean", "sigma"}
        if unknown:
            raise SimError(f"{where}: unknown key {sorted(unknown)[0]!r}; allowed: mean, sigma")
        mean, sigma = value.get("mean", nominal), value.get("sigma", 0.0)
    else:
        mean, sigma = nominal, value
    try:
        mean, sigma = float(mean), float(sigma)
    except (TypeError, ValueError):
        raise SimError(f"{where}: mean and sigma must be numbers, got {value!r}") from None
    if not (math.isfinite(mean) and math.isfinite(sigma)):
        raise SimError(f"{where}: mean and sigma must be finite, got {value!r}")
    return mean, sigma


PRESET_LOTS: dict[str, Lot] = {
    "patch-2g45": Lot("patch-2g45", "patch-2g45",
                      spread={"f0_hz": 10e6, "q": 1.5, "r_ohm": 10.0}),
    "whip-915": Lot("whip-915", "whip-915", spread={"f0_hz": 9e6, "q": 1.2, "r_ohm": 8.0}),
}
