"""The sweep record: frequencies, an S-parameter matrix per frequency, and metadata."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np


@dataclass(frozen=True, eq=False)
class Sweep:
    """One measured (or read) sweep; immutable, arrays read-only.

    ``freq_hz`` is float64 (n,), strictly increasing. ``s`` is complex128 (n, p, p).
    ``z0`` holds the real reference impedance of each port in ohms. ``meta`` carries
    plan name, DUT serial, instrument identity, stimulus, cal id and age, timestamps:
    plain JSON-able values only, so it can go into Touchstone comments and the journal.
    """

    freq_hz: np.ndarray
    s: np.ndarray
    z0: tuple[float, ...] = (50.0,)
    meta: Mapping[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        freq = np.array(self.freq_hz, dtype=np.float64)
        s = np.array(self.s, dtype=np.complex128)
        if s.ndim == 1:
            s = s.reshape(-1, 1, 1)
        if freq.ndim != 1 or s.ndim != 3 or s.shape[0] != freq.size or s.shape[1] != s.shape[2]:
            raise ValueError(f"sweep shapes disagree: freq {freq.shape}, s {s.shape}")
        z0 = tuple(float(z) for z in np.broadcast_to(np.asarray(self.z0, float), (s.shape[1],)))
        freq.flags.writeable = False
        s.flags.writeable = False
        object.__setattr__(self, "freq_hz", freq)
        object.__setattr__(self, "s", s)
        object.__setattr__(self, "z0", z0)
        object.__setattr__(self, "meta", MappingProxyType(dict(self.meta)))

    @property
    def ports(self) -> int:
        return int(self.s.shape[1])

    @property
    def points(self) -> int:
        return int(self.freq_hz.size)

    def param(self, name: str) -> np.ndarray:
        """One S-parameter as a (n,) complex array, e.g. ``param("S21")``."""
        if len(name) != 3 or name[0].upper() != "S" or not name[1:].isdigit():
            raise ValueError(f"not an S-parameter name: {name!r}")
        i, j = int(name[1]) - 1, int(name[2]) - 1
        if not (0 <= i < self.ports and 0 <= j < self.ports):
            raise ValueError(f"{name} does not exist in a {self.ports}-port sweep")
        return self.s[:, i, j]

    def with_meta(self, **extra: Any) -> Sweep:
        """A copy with metadata entries added or replaced (arrays are shared)."""
        return Sweep(self.freq_hz, self.s, self.z0, {**self.meta, **extra})

    def with_data(self, s: np.ndarray, **extra: Any) -> Sweep:
        """A copy holding other S data on the same grid (e.g. after correction)."""
        return Sweep(self.freq_hz, s, self.z0, {**self.meta, **extra})
