"""The steps of a guided calibration: which standard each one measures and what it reads.

A method from ``acquire.calibration.METHODS`` lists its standards in step order with the
port each is read at; each step here knows its kit standard, its kind (open, short, load,
thru: also the fixture / switch position, one of the fixed names a switch understands),
its port and the S-parameters it keeps from a sweep. A full two-port method reads
open, short and load at port 1, then at port 2, then the thru; its reflect steps keep
both reflections (S11 and S22) so a standard put on the wrong port can be told.

``two-port-unknown-thru`` needs the analyzer's switch terms: its thru step also reads
them (``switch.forward``, ``switch.reverse``) in the same sweep, which the analyzer can
only do when its dialect declares ``data.switch_terms``. The switch terms do not depend on
what is connected, but they are ratios to the wave received at the far port, so they are
read where that wave is strong: with the thru in place (common practice).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from acquire.calibration import CalKit, method
from acquire.calibration.calset import AGAIN
from acquire.errors import CalError
from drivers.dialect_model import SWITCH_TERMS, Dialect

PORT = 1  # the source port every one-port and one-path method calibrates
REFLECTION = "S11"
TRANSMISSION = "S21"
ALL_PARAMS = ("S11", "S21", "S12", "S22")
ISOLATION = "isolation"  # the step with loads on both ports; its readings are load.S21/S12
UNKNOWN_THRU = "two-port-unknown-thru"


@dataclass(frozen=True)
class Step:
    """One standard to connect and measure."""

    name: str  # unique step name: the kit standard, '-2' added for port 2 of a two-port
    kind: str  # open | short | load | thru: also the fixture / switch position
    params: tuple[str, ...]  # what the step keeps from a sweep
    standard: str = ""  # kit standard name (default: the step name)
    port: int = PORT  # 1 or 2 for a reflect standard, 0 for a thru (both ports)
    extra: tuple[str, ...] = ()  # readings of the same sweep beyond S (the switch terms)

    def __post_init__(self) -> None:
        if not self.standard:
            object.__setattr__(self, "standard", self.name)

    @property
    def label(self) -> str:
        if self.name == ISOLATION:
            return "ISOLATION (loads at both ports)"
        if self.port == 2:
            return f"{self.standard.upper()} at port 2"
        return self.name.upper()

    @property
    def is_reflect(self) -> bool:
        return self.kind != "thru"

    @property
    def reflection(self) -> str:
        """The reflection parameter of the port this standard sits at."""
        return "S22" if self.port == 2 else REFLECTION

    @property
    def reads_twice(self) -> bool:
        """A load at a port is read twice without reconnecting: the difference of the two
        readings is trace noise alone (``acquire.uncertainty.budget.noise_from_repeat``)."""
        return self.kind == "load" and self.port in (1, 2)

    @property
    def reads(self) -> tuple[str, ...]:
        """Everything the step holds after a measurement: its S-parameters and extras."""
        return (*self.params, *self.extra)

    @property
    def solve_params(self) -> tuple[str, ...]:
        """The readings the solver takes from this step."""
        return self.params if self.port == 0 else (self.reflection,)


def build_steps(method_name: str, kit: CalKit, ports: int, plan: str = "",
                isolation: bool = False, dialect: Dialect | None = None) -> tuple[Step, ...]:
    """The steps of ``method_name`` with ``kit``; ``CalError`` if the plan cannot do it.

    ``isolation`` adds a step with the kit's load on both ports before the thru (its
    transmission readings are the isolation terms). ``dialect`` says whether the analyzer
    can read its switch terms, which the unknown thru needs."""
    m = method(method_name)
    if m.two_port and ports < 2:
        raise CalError(f"plan {plan}: calibration method {m.name} calibrates two ports; the "
                       "plan measures S11 only (use measure: two-port)")
    extra = _switch_terms(m.name, plan, dialect)
    steps = []
    for spec in m.step_specs:
        kind = kit.standard(spec.standard).kind
        if kind == "thru" and ports < 2:
            raise CalError(f"plan {plan}: calibration method {m.name} needs a thru between "
                           "two ports; the plan measures S11 only (use measure: two-port)")
        if kind == "thru":
            params = ALL_PARAMS if m.two_port else (TRANSMISSION, REFLECTION)
        else:
            params = ("S11", "S22") if m.two_port else (REFLECTION,)
        if kind == "thru" and isolation:
            steps.append(_isolation_step(kit, m.two_port, plan))
        name = f"{spec.standard}-2" if spec.port == 2 else spec.standard
        steps.append(Step(name, kind, params, spec.standard, spec.port,
                          extra if kind == "thru" else ()))
    return tuple(steps)


def _switch_terms(method_name: str, plan: str, dialect: Dialect | None) -> tuple[str, ...]:
    """The extra readings of the thru step: the switch terms for the unknown thru."""
    if method_name != UNKNOWN_THRU:
        return ()
    if dialect is None or not dialect.switch_terms:
        source = dialect.source if dialect is not None else "the analyzer's dialect"
        raise CalError(f"plan {plan}: calibration method {method_name} reads the analyzer's "
                       f"switch terms, and {source} has no data.switch_terms (declare their "
                       "trace tokens there, see configs/dialects/README.md, or use method "
                       "two-port)")
    return SWITCH_TERMS


def _isolation_step(kit: CalKit, two_port: bool, plan: str) -> Step:
    loads = kit.names_of_kind("load")
    if not loads:
        raise CalError(f"plan {plan}: isolation needs a load standard; kit {kit.name} has none")
    return Step(ISOLATION, "load", ("S21", "S12") if two_port else (TRANSMISSION,),
                loads[0], 0)


def flat_readings(steps: tuple[Step, ...], held: Mapping[str, Mapping[str, np.ndarray]]
                  ) -> dict[str, np.ndarray]:
    """The solver's raw readings ``{"<standard>.<param>": array}`` from the held steps."""
    out: dict[str, np.ndarray] = {}
    for step in steps:
        for param in step.solve_params:
            if step.name in held and param in held[step.name]:
                out[f"{step.standard}.{param}"] = held[step.name][param]
        again = step.reflection + AGAIN
        if step.reads_twice and again in held.get(step.name, {}):
            out[f"{step.standard}.{again}"] = held[step.name][again]
        for name in step.extra:  # the switch terms keep their own names
            if name in held.get(step.name, {}):
                out[name] = held[step.name][name]
    return out
