"""Calibration methods: one object per method, in one registry.

Each method knows the standards it measures (in step order, with the port each one is
read at), how to solve its error terms from raw readings, and a one-line description.
The plan's allowed values, the guided procedure's steps and ``solve`` all take the list
from ``METHODS``. Correction follows from the solved terms (``ErrorModel``).

Raw standard readings are passed flat: ``{"open.S11": array, "thru.S21": array}``, keyed
``<kit standard name>.<S-parameter>``; a standard read at port 2 is stored under S22.
Switch terms, where measured, are ``switch.forward`` (a2/b2, port 1 driving) and
``switch.reverse`` (a1/b1).

Older method names (they echoed one instrument maker's menu wording) still load, with a
one-line warning: ``ALIASES`` maps them to the names used now.
"""

from __future__ import annotations

import logging
from collections.abc import Mapping
from typing import Any

import numpy as np

from acquire.calibration.errormodel import (
    ErrorModel,
    Solution,
    reflection_param,
    transmission_param,
)
from acquire.calibration.kit import CalKit
from acquire.calibration.methodbase import CalMethod, Context, FullOnePortMixin, StepSpec
from acquire.calibration.model import (
    OnePortTerms,
    TransmissionTerms,
    solve_open_short_average,
    solve_response,
    solve_thru,
    solve_two_term,
)
from acquire.calibration.twoport_methods import FullTwoPort, TwoPortUnknownThru
from acquire.errors import CalError

log = logging.getLogger(__name__)

__all__ = ["ALIASES", "METHODS", "CalMethod", "ErrorModel", "Method", "Solution", "StepSpec",
           "canonical_name", "method", "reflection_param", "solve", "transmission_param"]


class FullOnePort(CalMethod, FullOnePortMixin):
    name = "one-port"
    steps = ("open", "short", "load")
    summary = "full one-port: directivity, source match and reflection tracking"
    full_reflection = True

    def solve(self, ctx: Context) -> Solution:
        figures: dict[str, Any] = {"standards": list(ctx.names)}
        refl = reflection_param(ctx.port)
        terms, residual, independence = self.fit_port(ctx, ctx.reflect_names(), refl, figures)
        return Solution(ErrorModel(self.name, ctx.freq, {refl: terms}), figures, residual,
                        independence)


class OpenNormalisation(CalMethod):
    name = "open-normalisation"
    steps = ("open",)
    summary = "reflection tracking from an open only"

    def reflection_terms(self, ctx: Context, names: list[str], refl: str) -> OnePortTerms:
        (std,) = names
        return solve_response(ctx.reading(std, refl), ctx.gamma(std))


class ShortNormalisation(OpenNormalisation):
    name = "short-normalisation"
    steps = ("short",)
    summary = "reflection tracking from a short only"


class OpenShortNormalisation(CalMethod):
    name = "open-short-normalisation"
    steps = ("open", "short")
    summary = "reflection tracking from the open/short average"

    def reflection_terms(self, ctx: Context, names: list[str], refl: str) -> OnePortTerms:
        o, s = names
        return solve_open_short_average(ctx.reading(o, refl), ctx.gamma(o),
                                        ctx.reading(s, refl), ctx.gamma(s))


class OpenLoadTwoTerm(CalMethod):
    name = "open-load-two-term"
    steps = ("open", "load")
    summary = "open plus load: tracking and directivity"

    def reflection_terms(self, ctx: Context, names: list[str], refl: str) -> OnePortTerms:
        std, load = names
        return solve_two_term(ctx.reading(std, refl), ctx.gamma(std),
                              ctx.reading(load, refl), ctx.gamma(load))


class ShortLoadTwoTerm(OpenLoadTwoTerm):
    name = "short-load-two-term"
    steps = ("short", "load")
    summary = "short plus load: tracking and directivity"


class TransmissionNormalisation(CalMethod):
    name = "transmission-normalisation"
    steps = ("thru",)
    summary = "transmission tracking from a thru"

    def solve(self, ctx: Context) -> Solution:
        self.check_kinds(ctx)
        trans = transmission_param(ctx.port)
        thru = ctx.thru_name()
        _, t21 = ctx.kit.thru_s(thru, ctx.freq)
        terms = solve_thru(ctx.reading(thru, trans), t21,
                           isolation=ctx.isolation_reading(trans))
        return Solution(ErrorModel(self.name, ctx.freq, {}, {trans: terms}),
                        {"standards": list(ctx.names)})


class OnePathTwoPort(CalMethod, FullOnePortMixin):
    name = "one-path-two-port"
    steps = ("open", "short", "load", "thru")
    summary = "full one-port on the source port plus transmission tracking and load match " \
              "from a thru (one direction)"
    full_reflection = True

    def check_kinds(self, ctx: Context) -> None:
        pass  # any number (three or more) of reflect standards plus one thru

    def solve(self, ctx: Context) -> Solution:
        figures: dict[str, Any] = {"standards": list(ctx.names)}
        refl, trans = reflection_param(ctx.port), transmission_param(ctx.port)
        source, residual, independence = self.fit_port(ctx, ctx.reflect_names(), refl,
                                                       figures)
        thru = ctx.thru_name()
        t11, t21 = ctx.kit.thru_s(thru, ctx.freq)
        transmission: dict[str, TransmissionTerms] = {trans: solve_thru(
            ctx.reading(thru, trans), t21, isolation=ctx.isolation_reading(trans),
            source=source, s11m_thru=ctx.reading(thru, refl), s11_model=t11, s22_model=t11,
        )}
        model = ErrorModel(self.name, ctx.freq, {refl: source}, transmission)
        return Solution(model, figures, residual, independence)


def _registry(*classes: type[CalMethod]) -> dict[str, CalMethod]:
    return {cls.name: cls() for cls in classes}


METHODS: dict[str, CalMethod] = _registry(
    FullOnePort, OpenNormalisation, ShortNormalisation, OpenShortNormalisation,
    OpenLoadTwoTerm, ShortLoadTwoTerm, TransmissionNormalisation, OnePathTwoPort,
    FullTwoPort, TwoPortUnknownThru,
)
Method = CalMethod  # the older public name
ALIASES: dict[str, str] = {
    "response-open": "open-normalisation",
    "response-short": "short-normalisation",
    "response-open-short": "open-short-normalisation",
    "response-open-load": "open-load-two-term",
    "response-short-load": "short-load-two-term",
    "thru-response": "transmission-normalisation",
    "enhanced-response": "one-path-two-port",
}
_warned: set[str] = set()


def canonical_name(name: str, where: str = "") -> str:
    """The current name for ``name``; an older name logs a one-line warning (once)."""
    new = ALIASES.get(name)
    if new is None:
        return name
    if name not in _warned:
        _warned.add(name)
        place = f"{where}: " if where else ""
        log.warning("%scalibration method '%s' is now called '%s'; the old name still "
                    "works but is deprecated", place, name, new)
    return new


def method(name: str) -> CalMethod:
    """Look up a method by name (older names too); ``CalError`` listing the known ones."""
    try:
        return METHODS[canonical_name(name)]
    except KeyError:
        raise CalError(f"unknown calibration method '{name}' "
                       f"(known: {', '.join(METHODS)})") from None


def solve(method_name: str, freq_hz: np.ndarray, raw: Mapping[str, np.ndarray], kit: CalKit,
          *, port: int = 1, standards: tuple[str, ...] | None = None,
          isolation: str | None = None) -> Solution:
    """Solve a calibration from raw standard readings.

    ``raw`` maps ``"<standard>.<param>"`` to (F,) complex readings. ``standards`` names the
    kit standards used (default: the method's steps); a full one-port may list more than
    three reflect standards for a least-squares solve. ``isolation`` names a raw key (for
    example ``"isolation.S21"``) read with loads on both ports, if one was measured.
    """
    m = method(method_name)
    freq = np.asarray(freq_hz, np.float64)
    kit.check_range(freq)
    if port not in (1, 2):
        raise CalError(f"port must be 1 or 2, got {port}")
    if isolation is not None and "." not in isolation:
        raise CalError(f"isolation reading must be named '<standard>.<param>', got '{isolation}'")
    names = tuple(dict.fromkeys(standards)) if standards else tuple(dict.fromkeys(m.steps))
    return m.solve(Context(m.name, freq, raw, kit, port, names, isolation))
