"""The plan's ``station:`` section, validated with one-line errors (file and key path).

::

    station:
      id: line-a-1                    # station id recorded with every run (--station overrides)
      serial:
        pattern: "PA-[0-9]{4}"        # regular expression the whole serial must match
        max_length: 16                # characters (default 40)
      band: [2.40 GHz, 2.50 GHz]      # band of "worst SWR in band" (default: the S11 masks)
      golden:
        serial: GOLDEN                # label of the reference unit
        reference: golden/unit.s1p    # its stored Touchstone file (relative to the plan)
        at_start: true                # ask for it at the start of every shift (default)
        every_units: 50               # and after this many units ...
        every: 4 h                    # ... or this much time since the last good check
        band: [2.40 GHz, 2.50 GHz]    # compare only here (default: the whole sweep)
        tolerance: {magnitude: 0.5 dB, phase: 5 deg, vector: 0.05, min_level: -40 dB}
      hooks:                          # commands on pass, fail, line_stopped, line_resumed
        fail: [/opt/line/stacklight, red, "{serial}"]      # (acquire.station.hooks)
      indeterminate:                  # a unit within the guard band (plan decision: guarded)
        action: retest                # retest (default): reseat and measure again; or hold
        retests: 1                    # re-measurements before the unit goes on hold (0-5)

Everything is optional; a plan without the section gets the default serial rule
(letters, digits and ``. _ + -``, starting with a letter or digit, at most 40 long).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Any

from acquire.plan import Plan
from acquire.station.errors import StationError
from acquire.station.golden import (
    DEFAULT_MIN_LEVEL_DB,
    GoldenSpec,
    Tolerance,
    load_reference,
)
from acquire.station.hooks import Hooks, parse_hooks
from acquire.station.pattern import PatternError, compile_pattern
from acquire.station.serials import (
    DEFAULT_MAX_LENGTH,
    DEFAULT_PATTERN,
    MAX_LENGTH_LIMIT,
    SerialRule,
    unsafe_reason,
)
from acquire.units import format_frequency
from acquire.yamlfile import Node, show

STATION_ID = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,31}")


@dataclass(frozen=True)
class IndeterminateRule:
    """What the station does with an indeterminate unit (guarded acceptance)."""

    action: str = "retest"  # retest | hold
    retests: int = 1

    def describe(self) -> str:
        if self.action == "hold" or self.retests == 0:
            return "indeterminate units go on hold"
        return f"indeterminate units are retested up to {self.retests} time(s), then held"


@dataclass(frozen=True)
class StationConfig:
    station_id: str | None = None
    serial: SerialRule = field(default_factory=SerialRule)
    band_hz: tuple[float, float] | None = None
    golden: GoldenSpec | None = None
    hooks: Hooks = field(default_factory=Hooks)
    indeterminate: IndeterminateRule = field(default_factory=IndeterminateRule)


def station_config(plan: Plan) -> StationConfig:
    """The validated ``station:`` section of ``plan`` (defaults when it has none)."""
    node = plan.sections.get("station")
    if node is None or node.value is None:
        return StationConfig()
    return parse_station(node, plan)


def parse_station(node: Node, plan: Plan) -> StationConfig:
    node.mapping(("id", "serial", "band", "golden", "indeterminate", "hooks"))
    station_id = node["id"].text(None)
    if station_id is not None:
        check_station_id(station_id, node["id"])
    return StationConfig(
        station_id=station_id,
        serial=_serial(node["serial"]),
        band_hz=_band(node["band"], plan) if node["band"].present else None,
        golden=_golden(node["golden"], plan) if node["golden"].present else None,
        hooks=parse_hooks(node["hooks"]),
        indeterminate=_indeterminate(node["indeterminate"]),
    )


def _indeterminate(node: Node) -> IndeterminateRule:
    """``indeterminate: hold`` or ``{action: retest, retests: 2}``."""
    if not node.present:
        return IndeterminateRule()
    if isinstance(node.value, str):
        return IndeterminateRule(node.text(choices=("retest", "hold")))
    node.mapping(("action", "retests"))
    return IndeterminateRule(node["action"].text("retest", choices=("retest", "hold")),
                             node["retests"].integer(1, lo=0, hi=5))


def check_station_id(text: str, node: Node | None = None) -> str:
    """A station id: 1-32 letters, digits, '.', '_' or '-' (it goes into file names)."""
    if STATION_ID.fullmatch(text):
        return text
    message = (f"station id must be 1-32 letters, digits, '.', '_' or '-' (starting with a "
               f"letter or digit), got {show(text)}")
    if node is not None:
        node.fail(message)
    raise StationError(message)


def _serial(node: Node) -> SerialRule:
    if not node.present:
        return SerialRule()
    node.mapping(("pattern", "max_length"))
    pattern = node["pattern"].text(DEFAULT_PATTERN)
    try:
        compiled = compile_pattern(pattern)
    except PatternError as exc:
        node["pattern"].fail(str(exc))
    if compiled.fullmatch(""):
        node["pattern"].fail(f"must not accept an empty serial, got {show(pattern)}")
    max_length = node["max_length"].integer(DEFAULT_MAX_LENGTH, lo=1, hi=MAX_LENGTH_LIMIT)
    return SerialRule(pattern, max_length)


def _band(node: Node, plan: Plan) -> tuple[float, float]:
    items = node.elements(min_len=2)
    if len(items) != 2:
        node.fail(f"must be a pair [low, high], got {len(items)} values")
    lo = items[0].quantity("frequency", lo=0.0)
    hi = items[1].quantity("frequency", lo=0.0)
    if hi <= lo:
        node.fail(f"low end {format_frequency(lo)} must lie below high end "
                  f"{format_frequency(hi)}")
    st = plan.stimulus
    slack = 1e-9 * st.stop_hz
    if lo < st.start_hz - slack or hi > st.stop_hz + slack:
        node.fail(f"{format_frequency(lo)}..{format_frequency(hi)} is not inside the sweep "
                  f"{format_frequency(st.start_hz)}..{format_frequency(st.stop_hz)}")
    return lo, hi


def _golden(node: Node, plan: Plan) -> GoldenSpec:
    node.mapping(("serial", "reference", "at_start", "every_units", "every", "band",
                  "tolerance"), required=("reference",))
    serial = node["serial"].text("GOLDEN")
    why = unsafe_reason(serial, DEFAULT_MAX_LENGTH)
    if why:
        node["serial"].fail(why)
    reference = node["reference"].file_path()
    if not reference.is_file():
        node["reference"].fail(f"file not found: {reference}")
    every_s = node["every"].quantity("time", None, lo=1.0)
    spec = GoldenSpec(
        serial=serial,
        reference=reference,
        at_start=node["at_start"].boolean(True),
        every_units=node["every_units"].integer(None, lo=1, hi=1_000_000),
        every_s=every_s,
        band_hz=_band(node["band"], plan) if node["band"].present else None,
        tolerance=_tolerance(node["tolerance"]),
    )
    load_reference(spec, plan, node["reference"])
    return spec


def _tolerance(node: Node) -> Tolerance:
    if not node.present:
        return Tolerance()
    node.mapping(("magnitude", "phase", "vector", "min_level"))
    values: dict[str, Any] = {
        "magnitude_db": node["magnitude"].quantity("decibel", None, lo=1e-6, hi=60.0),
        "phase_deg": node["phase"].quantity("angle", None, lo=1e-6, hi=180.0),
        "vector": node["vector"].number(None, lo=1e-9, hi=2.0),
    }
    if all(v is None for v in values.values()):
        node.fail("give at least one of magnitude (dB), phase (deg) or vector (linear)")
    values["min_level_db"] = node["min_level"].quantity(
        "decibel", DEFAULT_MIN_LEVEL_DB, lo=-200.0, hi=0.0)
    return Tolerance(**values)
