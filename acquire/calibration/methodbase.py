"""What every calibration method shares: its step list, solve context and base class.

The methods themselves are in ``acquire.calibration.methods`` (one-port and one-path)
and ``acquire.calibration.twoport_methods`` (full two-port); the registry is
``methods.METHODS``.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np

from acquire.calibration.errormodel import ErrorModel, Solution, reflection_param
from acquire.calibration.kit import CalKit
from acquire.calibration.model import OnePortTerms, solve_one_port
from acquire.errors import CalError


@dataclass(frozen=True)
class StepSpec:
    """One standard of a method: its kit name and the port it is read at (0: both)."""

    standard: str
    port: int = 1


@dataclass
class Context:
    """What a method's solve needs: grid, readings, kit, port and the standards used."""

    name: str
    freq: np.ndarray
    raw: Mapping[str, np.ndarray]
    kit: CalKit
    port: int
    names: tuple[str, ...]
    isolation: str | None

    def reading(self, std: str, param: str) -> np.ndarray:
        key = f"{std}.{param}"
        if key not in self.raw:
            raise CalError(f"{self.name} calibration: no raw reading '{key}' "
                           f"(have: {', '.join(sorted(self.raw)) or 'none'})")
        values = np.asarray(self.raw[key], np.complex128)
        if values.shape != self.freq.shape:
            raise CalError(f"raw reading '{key}' has {values.size} points, grid has "
                           f"{self.freq.size}")
        return values

    def gamma(self, std: str) -> np.ndarray:
        return self.kit.reflection(std, self.freq)

    def kinds(self) -> list[str]:
        return [self.kit.standard(n).kind for n in self.names]

    def reflect_names(self) -> list[str]:
        return [n for n in self.names if self.kit.standard(n).kind != "thru"]

    def thru_name(self) -> str:
        thrus = [n for n in self.names if self.kit.standard(n).kind == "thru"]
        if len(thrus) != 1:
            raise CalError(f"{self.name} calibration needs exactly one thru standard")
        return thrus[0]

    def isolation_reading(self, param: str) -> np.ndarray | None:
        if self.isolation is None:
            return None
        return self.reading(self.isolation.split(".", 1)[0], param)


class CalMethod:
    """Base: a method's name, standards, description and solve."""

    name: ClassVar[str]
    steps: ClassVar[tuple[str, ...]]  # kit standard names in step order (one per standard)
    summary: ClassVar[str]
    full_reflection: ClassVar[bool] = False  # solves directivity and source match too
    two_port: ClassVar[bool] = False  # reads standards on both ports

    @property
    def step_specs(self) -> tuple[StepSpec, ...]:
        """The standards in step order with the port each is read at."""
        return tuple(StepSpec(s, 0 if s == "thru" else 1) for s in self.steps)

    @property
    def needs_thru(self) -> bool:
        return "thru" in self.steps

    def check_kinds(self, ctx: Context) -> None:
        if sorted(ctx.kinds()) != sorted(self.steps):
            raise CalError(f"{self.name} calibration uses {', '.join(self.steps)}; "
                           f"got standards of kind {', '.join(ctx.kinds())}")

    def solve(self, ctx: Context) -> Solution:
        self.check_kinds(ctx)
        refl = reflection_param(ctx.port)
        terms = self.reflection_terms(ctx, ctx.reflect_names(), refl)
        return Solution(ErrorModel(self.name, ctx.freq, {refl: terms}),
                        {"standards": list(ctx.names)})

    def reflection_terms(self, ctx: Context, names: list[str], refl: str) -> OnePortTerms:
        raise NotImplementedError


class FullOnePortMixin:
    """Least-squares one-port from three or more reflect standards."""

    @staticmethod
    def fit_port(ctx: Context, names: list[str], refl: str, figures: dict[str, Any]
                 ) -> tuple[OnePortTerms, np.ndarray, np.ndarray]:
        if len(names) < 3:
            raise CalError(f"{ctx.name} calibration needs at least three reflect standards, "
                           f"got {', '.join(names) or 'none'}")
        meas = np.stack([ctx.reading(n, refl) for n in names], axis=1)
        ideal = np.stack([ctx.gamma(n) for n in names], axis=1)
        fit = solve_one_port(meas, ideal, tuple(names), ctx.freq)
        key = "min_independence" if refl == "S11" or "min_independence" not in figures \
            else f"{refl}_min_independence"
        figures[key] = float(np.min(fit.independence))
        if len(names) > 3:
            rel = np.abs(fit.residual) / np.abs(fit.terms.reflection_tracking)[:, None]
            figures["max_residual"] = {n: float(rel[:, k].max()) for k, n in enumerate(names)}
        return fit.terms, fit.residual, fit.independence
