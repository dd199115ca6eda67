"""The steps of a guided calibration: which standard each one measures and what it reads.

A method from ``acquire.calibration.METHODS`` names kit standards in step order; each step
here knows its standard's kind (open, short, load, thru), the S-parameters it keeps from
a sweep and the fixture position (one of the fixed names a switch understands).
"""

from __future__ import annotations

from dataclasses import dataclass

from acquire.calibration import CalKit, method
from acquire.errors import CalError

PORT = 1  # the source port every guided method calibrates
REFLECTION = "S11"
TRANSMISSION = "S21"


@dataclass(frozen=True)
class Step:
    """One standard to connect and measure."""

    name: str  # kit standard name; raw readings are stored as "<name>.<param>"
    kind: str  # open | short | load | thru: also the fixture / switch position
    params: tuple[str, ...]

    @property
    def label(self) -> str:
        return self.name.upper()

    @property
    def is_reflect(self) -> bool:
        return self.kind != "thru"


def build_steps(method_name: str, kit: CalKit, ports: int, plan: str = "") -> tuple[Step, ...]:
    """The steps of ``method_name`` with ``kit``; ``CalError`` if the plan cannot do it."""
    m = method(method_name)
    steps = []
    for name in m.steps:
        kind = kit.standard(name).kind
        if kind == "thru" and ports < 2:
            raise CalError(f"plan {plan}: calibration method {method_name} needs a thru between "
                           "two ports; the plan measures S11 only (use measure: two-port)")
        params = (TRANSMISSION, REFLECTION) if kind == "thru" else (REFLECTION,)
        steps.append(Step(name, kind, params))
    return tuple(steps)
