"""Full two-port methods: open/short/load on each port plus a thru (12-term model).

``two-port`` takes the thru's S-parameters from the kit (defined thru, offset model);
``two-port-unknown-thru`` needs only a reciprocal thru of roughly known delay plus the
measured switch terms (method and source in ``acquire.calibration.twoport``).
Readings: ``<standard>.S11`` for port 1, ``<standard>.S22`` for port 2, the thru's four
``thru.Sij``, and for the unknown thru ``switch.forward`` / ``switch.reverse``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from acquire.calibration.errormodel import ErrorModel, Solution
from acquire.calibration.methodbase import CalMethod, Context, FullOnePortMixin, StepSpec
from acquire.calibration.twoport import TwelveTerms, solve_defined_thru, solve_unknown_thru
from acquire.errors import CalError

SWITCH_KEYS = ("switch.forward", "switch.reverse")


class FullTwoPort(CalMethod, FullOnePortMixin):
    name = "two-port"
    steps = ("open", "short", "load", "thru")
    summary = ("full two-port (12-term): open, short and load on each port plus a defined "
               "thru; corrects S11, S21, S12 and S22 together")
    full_reflection = True
    two_port = True

    @property
    def step_specs(self) -> tuple[StepSpec, ...]:
        reflect = [s for s in self.steps if s != "thru"]
        return (*(StepSpec(s, 1) for s in reflect), *(StepSpec(s, 2) for s in reflect),
                StepSpec("thru", 0))

    def check_kinds(self, ctx: Context) -> None:
        if len(ctx.reflect_names()) < 3:
            raise CalError(f"{self.name} calibration needs at least three reflect standards "
                           f"per port, got {', '.join(ctx.reflect_names()) or 'none'}")
        ctx.thru_name()

    def solve(self, ctx: Context) -> Solution:
        self.check_kinds(ctx)
        figures: dict[str, Any] = {"standards": list(ctx.names)}
        names = ctx.reflect_names()
        port1, residual, independence = self.fit_port(ctx, names, "S11", figures)
        port2, _, _ = self.fit_port(ctx, names, "S22", figures)
        thru = ctx.thru_name()
        raw = self.thru_raw(ctx, thru)
        iso = self.isolation_raw(ctx)
        terms = self.transmission(ctx, thru, port1, port2, raw, iso, figures)
        model = ErrorModel(self.name, ctx.freq,
                           {"S11": terms.port1, "S22": terms.port2},
                           {"S21": terms.forward, "S12": terms.reverse})
        return Solution(model, figures, residual, independence)

    def transmission(self, ctx: Context, thru: str, port1: Any, port2: Any,
                     raw: np.ndarray, iso: np.ndarray | None, figures: dict[str, Any]
                     ) -> TwelveTerms:
        return solve_defined_thru(port1, port2, raw, self.thru_model(ctx, thru), iso)

    @staticmethod
    def thru_model(ctx: Context, thru: str) -> np.ndarray:
        t11, t21 = ctx.kit.thru_s(thru, ctx.freq)
        model = np.empty((ctx.freq.size, 2, 2), np.complex128)
        model[:, 0, 0] = model[:, 1, 1] = t11
        model[:, 1, 0] = model[:, 0, 1] = t21
        return model

    @staticmethod
    def thru_raw(ctx: Context, thru: str) -> np.ndarray:
        raw = np.empty((ctx.freq.size, 2, 2), np.complex128)
        for i, j in ((0, 0), (1, 0), (0, 1), (1, 1)):
            raw[:, i, j] = ctx.reading(thru, f"S{i + 1}{j + 1}")
        return raw

    @staticmethod
    def isolation_raw(ctx: Context) -> np.ndarray | None:
        if ctx.isolation is None:
            return None
        raw = np.zeros((ctx.freq.size, 2, 2), np.complex128)
        raw[:, 1, 0] = ctx.isolation_reading("S21")
        raw[:, 0, 1] = ctx.isolation_reading("S12")
        return raw


class TwoPortUnknownThru(FullTwoPort):
    name = "two-port-unknown-thru"
    summary = ("full two-port (12-term) with a reciprocal thru of unknown loss and match, "
               "from measured switch terms")

    def transmission(self, ctx: Context, thru: str, port1: Any, port2: Any,
                     raw: np.ndarray, iso: np.ndarray | None, figures: dict[str, Any]
                     ) -> TwelveTerms:
        forward, reverse = (ctx.reading(*key.split(".", 1)) for key in SWITCH_KEYS)
        estimate = self.thru_model(ctx, thru)[:, 1, 0]
        terms, s21 = solve_unknown_thru(port1, port2, raw, forward, reverse, estimate, iso)
        figures["thru_s21_db_median"] = float(np.median(20 * np.log10(
            np.maximum(np.abs(s21), 1e-300))))
        return terms
