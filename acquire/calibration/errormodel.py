"""``ErrorModel``: solved error terms on a frequency grid, correcting raw sweeps.

Terms are keyed by the S-parameter they correct: reflection terms under ``S11``/``S22``,
transmission terms under ``S21``/``S12``. Flat names (``"S11.directivity"``) are what a
cal set file stores; a full two-port set is the same twelve names (see
``acquire.calibration.twoport``), so readers of the flat terms need not know the method.

A model holding reflection terms on both ports and transmission terms both ways is a
12-term model and corrects the four S-parameters together (``twoport.correct_twelve``);
any other model corrects each covered parameter on its own.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np

from acquire.calibration.model import (
    ONE_PORT_TERMS,
    TRANSMISSION_TERMS,
    OnePortTerms,
    TransmissionTerms,
)
from acquire.calibration.twoport import TWO_PORT_PARAMS, TwelveTerms, correct_twelve
from acquire.errors import CalError
from acquire.sweep import Sweep
from acquire.units import format_frequency


def reflection_param(port: int) -> str:
    return f"S{port}{port}"


def transmission_param(port: int) -> str:
    """The transmission parameter whose source is ``port`` (S21 from port 1)."""
    return "S21" if port == 1 else "S12"


@dataclass(frozen=True, eq=False)
class ErrorModel:
    """Solved error terms on a frequency grid; corrects raw sweeps."""

    method: str
    freq_hz: np.ndarray
    reflection: Mapping[str, OnePortTerms] = field(default_factory=dict)
    transmission: Mapping[str, TransmissionTerms] = field(default_factory=dict)

    def __post_init__(self) -> None:
        freq = np.array(self.freq_hz, dtype=np.float64)
        freq.flags.writeable = False
        object.__setattr__(self, "freq_hz", freq)
        object.__setattr__(self, "reflection", MappingProxyType(dict(self.reflection)))
        object.__setattr__(self, "transmission", MappingProxyType(dict(self.transmission)))

    @property
    def params(self) -> tuple[str, ...]:
        """The S-parameters this model corrects."""
        return (*self.reflection, *self.transmission)

    @property
    def twelve_term(self) -> TwelveTerms | None:
        """The full two-port terms, when the model holds all of them."""
        if set(self.params) != set(TWO_PORT_PARAMS):
            return None
        return TwelveTerms(self.reflection["S11"], self.reflection["S22"],
                           self.transmission["S21"], self.transmission["S12"])

    def flat_terms(self) -> dict[str, np.ndarray]:
        """All terms as ``{"S11.directivity": array, ...}``."""
        out = {}
        for param, terms in (*self.reflection.items(), *self.transmission.items()):
            out.update({f"{param}.{n}": a for n, a in terms.as_dict().items()})
        return out

    @classmethod
    def from_flat(cls, method_name: str, freq_hz: np.ndarray,
                  terms: Mapping[str, np.ndarray]) -> ErrorModel:
        """Rebuild from flat named terms (as stored in a cal set)."""
        groups: dict[str, dict[str, np.ndarray]] = {}
        for key, arr in terms.items():
            param, _, name = key.partition(".")
            groups.setdefault(param, {})[name] = arr
        reflection, transmission = {}, {}
        for param, group in groups.items():
            if param in ("S11", "S22") and set(group) == set(ONE_PORT_TERMS):
                reflection[param] = OnePortTerms.from_terms(group)
            elif param in ("S21", "S12") and set(group) == set(TRANSMISSION_TERMS):
                transmission[param] = TransmissionTerms.from_terms(group)
            else:
                raise ValueError(f"unexpected error terms for {param}: {', '.join(sorted(group))}")
        return cls(method_name, freq_hz, reflection, transmission)

    def correct_param(self, param: str, sweep: Sweep) -> np.ndarray:
        """The corrected values of one covered parameter of ``sweep``."""
        full = self.twelve_term
        if full is not None and sweep.ports > 1:
            return correct_twelve(full, np.asarray(sweep.s))[param]
        if param in self.reflection:
            return self.reflection[param].correct(sweep.param(param))
        terms = self.transmission[param]
        source = reflection_param(1 if param == "S21" else 2)
        if source in self.reflection and sweep.ports > 1:
            s11 = self.reflection[source].correct(sweep.param(source))
            return terms.correct(sweep.param(param), self.reflection[source].source_match, s11)
        return terms.correct(sweep.param(param))

    def correct(self, sweep: Sweep, **meta: Any) -> Sweep:
        """A corrected copy of ``sweep`` (same grid required); uncovered parameters stay raw.

        Adds ``cal_corrected`` (list of corrected parameters) and ``meta`` to the sweep's
        metadata. Raises ``CalError`` on another grid or when nothing can be corrected.
        """
        if sweep.freq_hz.shape != self.freq_hz.shape or not np.allclose(
            sweep.freq_hz, self.freq_hz, rtol=1e-12, atol=0.0
        ):
            raise CalError(f"calibration grid ({self.freq_hz.size} points) does not match the "
                           f"sweep ({sweep.points} points): recalibrate or interpolate")
        present = [p for p in self.params if int(p[1]) <= sweep.ports and int(p[2]) <= sweep.ports]
        if not present:
            raise CalError(f"calibration corrects {', '.join(self.params)} but the sweep holds "
                           f"a {sweep.ports}-port measurement")
        full = self.twelve_term if sweep.ports > 1 else None
        corrected = correct_twelve(full, np.asarray(sweep.s)) if full is not None else None
        s = np.array(sweep.s)
        for param in present:
            values = corrected[param] if corrected else self.correct_param(param, sweep)
            bad = ~np.isfinite(values)
            if bad.any():
                at = format_frequency(float(self.freq_hz[np.argmax(bad)]))
                raise CalError(f"{param} correction is singular at {at}: the error terms are "
                               f"unusable there; recalibrate")
            s[:, int(param[1]) - 1, int(param[2]) - 1] = values
        return sweep.with_data(s, cal_corrected=present, **meta)


@dataclass(frozen=True, eq=False)
class Solution:
    """A solved calibration plus its fit figures (JSON-able) and per-point arrays."""

    model: ErrorModel
    figures: Mapping[str, Any]
    residual: np.ndarray | None = None  # (F, K) least-squares misfit, one-port only
    independence: np.ndarray | None = None  # (F,) see OnePortFit
