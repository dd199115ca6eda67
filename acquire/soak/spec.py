"""The ``schedule:`` and ``soak:`` sections of a plan, validated into a ``SoakSpec``.

    schedule:
      every: 1 min              # time between sweep starts; 0 s = back to back
      for: 8 h                  # or count: 480; neither = until cancelled
    soak:
      reference: first          # or a Touchstone file (relative to the plan)
      parameter: S11            # the tracked parameter (one the plan measures)
      band: [2.40 GHz, 2.50 GHz]   # where the worst SWR is taken (default: whole sweep)
      keep: {every: 10, failing: true, over_threshold: true}
      alarms:
        deviation_db: 0.5 dB    # max |change| of |S| in dB at any point
        deviation_deg: 5 deg    # max |change| of the phase at any point
        resonance_shift: 2 MHz  # |resonance - reference resonance|
        worst_swr: 2.0          # worst in-band SWR ceiling
        worst_swr_rise: 0.2     # worst in-band SWR above the reference's
        resonance_adev: 50 kHz  # overlapping Allan deviation of the resonance, any tau
        command: "logger -t sweepd-alarm"   # optional, run per alarm (no shell)
      faults: {retries: 2, backoff_first: 0.5 s, backoff_max: 30 s, give_up: 2 h}
      disk_reserve: 200 MB      # stop capturing when less is free
      statistics: {min_sweeps: 20, min_span: 10 min}   # before trends and Allan deviation

Errors are one line naming the plan file and key path, as everywhere else.
"""

from __future__ import annotations

import math
import re
import shlex
from dataclasses import dataclass, field
from pathlib import Path

from acquire.errors import PlanError
from acquire.plan import Plan
from acquire.soak.statistics import Minimums
from acquire.yamlfile import Node, show

REFLECTIONS = ("S11", "S22")
_SIZE = re.compile(r"^\s*(\d+(?:\.\d*)?|\.\d+)\s*([kMGT]i?B|B)?\s*$")
_SIZE_LIMIT = 2**50  # 1 PiB: a byte count beyond it is a typing slip
_SIZE_FACTORS = {
    None: 1, "B": 1, "kB": 10**3, "MB": 10**6, "GB": 10**9, "TB": 10**12,
    "KiB": 2**10, "MiB": 2**20, "GiB": 2**30, "TiB": 2**40,
}
DEFAULT_RESERVE = 100 * 10**6


@dataclass(frozen=True)
class Schedule:
    """When sweeps are due: sweep ``k`` at ``start + k * every_s``."""

    every_s: float
    count: int | None = None
    duration_s: float | None = None

    @property
    def bounded(self) -> bool:
        return self.count is not None or self.duration_s is not None

    def total(self) -> int | None:
        """How many sweeps the job plans, when that is known in advance."""
        if self.count is not None:
            return self.count
        if self.duration_s is not None and self.every_s > 0:
            return max(1, math.ceil(self.duration_s / self.every_s - 1e-9))
        return None


@dataclass(frozen=True)
class KeepRule:
    """Which sweeps are written as Touchstone files (metrics are always journalled)."""

    every: int = 1
    failing: bool = True
    over_threshold: bool = True


@dataclass(frozen=True)
class Thresholds:
    """Alarm thresholds; ``None`` means not watched."""

    deviation_db: float | None = None
    deviation_deg: float | None = None
    resonance_shift_hz: float | None = None
    worst_swr: float | None = None
    worst_swr_rise: float | None = None
    resonance_adev_hz: float | None = None
    command: tuple[str, ...] = ()

    def watched(self) -> dict[str, float]:
        """Metric name -> threshold, for the thresholds that are set."""
        names = ("deviation_db", "deviation_deg", "resonance_shift_hz", "worst_swr",
                 "worst_swr_rise", "resonance_adev_hz")
        return {n: getattr(self, n) for n in names if getattr(self, n) is not None}


@dataclass(frozen=True)
class FaultPolicy:
    """How faults are survived: retries per sweep and bounded exponential backoff."""

    retries: int = 2
    backoff_first_s: float = 0.5
    backoff_max_s: float = 30.0
    give_up_s: float | None = None  # None: keep trying until the job ends


@dataclass(frozen=True)
class SoakSpec:
    schedule: Schedule
    reference: Path | None = None  # None: the first good sweep
    parameter: str = "S11"
    band_hz: tuple[float, float] | None = None
    keep: KeepRule = field(default_factory=KeepRule)
    alarms: Thresholds = field(default_factory=Thresholds)
    faults: FaultPolicy = field(default_factory=FaultPolicy)
    disk_reserve_bytes: int = DEFAULT_RESERVE
    minimums: Minimums = field(default_factory=Minimums)

    @property
    def reflection(self) -> bool:
        return self.parameter in REFLECTIONS


def parse_soak(plan: Plan) -> SoakSpec:
    """Validate a plan's ``schedule:`` and ``soak:`` sections (``schedule`` is required)."""
    schedule_node = plan.sections.get("schedule")
    if schedule_node is None:
        raise PlanError(
            f"plan {plan.source}: schedule: is required for a soak "
            "(e.g. schedule: {every: 1 min, for: 8 h})"
        )
    schedule = _schedule(schedule_node)
    soak = plan.sections.get("soak")
    if soak is None:
        return SoakSpec(schedule, parameter=plan.measure[0])
    soak.mapping(("reference", "parameter", "band", "keep", "alarms", "faults",
                  "disk_reserve", "statistics"))
    parameter = soak["parameter"].text(plan.measure[0], choices=plan.measure)
    return SoakSpec(
        schedule=schedule,
        reference=_reference(soak["reference"]),
        parameter=parameter,
        band_hz=_band(soak["band"], plan),
        keep=_keep(soak["keep"]),
        alarms=_alarms(soak["alarms"], parameter),
        faults=_faults(soak["faults"]),
        disk_reserve_bytes=_size(soak["disk_reserve"], DEFAULT_RESERVE),
        minimums=_minimums(soak["statistics"]),
    )


def _minimums(node: Node) -> Minimums:
    node.mapping(("min_sweeps", "min_span"), optional=True)
    base = Minimums()
    return Minimums(
        min_sweeps=node["min_sweeps"].integer(base.min_sweeps, lo=3, hi=10_000_000),
        min_span_s=node["min_span"].quantity("time", base.min_span_s, lo=0.0,
                                             hi=366 * 86400.0),
    )


def _schedule(node: Node) -> Schedule:
    node.mapping(("every", "for", "count"), required=("every",))
    if node["for"].present and node["count"].present:
        node.fail("give 'for' (a duration) or 'count', not both")
    duration = node["for"].quantity("time", None, lo=0.001, hi=366 * 86400.0)
    return Schedule(
        every_s=node["every"].quantity("time", lo=0.0, hi=7 * 86400.0),
        count=node["count"].integer(None, lo=1, hi=100_000_000),
        duration_s=duration,
    )


def _reference(node: Node) -> Path | None:
    if not node.present or node.value == "first":
        return None
    path = node.file_path()
    if not path.is_file():
        node.fail(f"must be 'first' or an existing Touchstone file, got {show(node.value)} "
                  f"({path} not found)")
    return path


def _band(node: Node, plan: Plan) -> tuple[float, float] | None:
    if not node.present:
        return None
    items = node.elements()
    if len(items) != 2:
        node.fail(f"must be [low, high], got {len(items)} entries")
    lo, hi = (item.quantity("frequency", lo=0.0) for item in items)
    stim = plan.stimulus
    if not lo < hi:
        node.fail(f"low edge must be below the high edge, got {lo:g} Hz .. {hi:g} Hz")
    if hi < stim.start_hz or lo > stim.stop_hz:
        node.fail(f"{lo:g} Hz .. {hi:g} Hz lies outside the sweep "
                  f"{stim.start_hz:g} Hz .. {stim.stop_hz:g} Hz")
    return lo, hi


def _keep(node: Node) -> KeepRule:
    node.mapping(("every", "failing", "over_threshold"), optional=True)
    return KeepRule(
        every=node["every"].integer(1, lo=1, hi=10_000_000),
        failing=node["failing"].boolean(True),
        over_threshold=node["over_threshold"].boolean(True),
    )


def _alarms(node: Node, parameter: str) -> Thresholds:
    node.mapping(("deviation_db", "deviation_deg", "resonance_shift", "worst_swr",
                  "worst_swr_rise", "resonance_adev", "command"), optional=True)
    reflection_only = ("resonance_shift", "worst_swr", "worst_swr_rise", "resonance_adev")
    if parameter not in REFLECTIONS:
        for key in reflection_only:
            if node[key].present:
                node[key].fail(f"needs a reflection parameter (S11 or S22); the soak tracks "
                               f"{parameter}")
    command: tuple[str, ...] = ()
    if node["command"].present:
        text = node["command"].text()
        try:
            command = tuple(shlex.split(text))
        except ValueError as exc:
            node["command"].fail(f"cannot split {show(text)} into words: {exc}")
        if not command:
            node["command"].fail("is empty")
    return Thresholds(
        deviation_db=node["deviation_db"].quantity("decibel", None, lo=0.0),
        deviation_deg=node["deviation_deg"].quantity("angle", None, lo=0.0, hi=180.0),
        resonance_shift_hz=node["resonance_shift"].quantity("frequency", None, lo=0.0),
        worst_swr=node["worst_swr"].number(None, lo=1.0),
        worst_swr_rise=node["worst_swr_rise"].number(None, lo=0.0),
        resonance_adev_hz=node["resonance_adev"].quantity("frequency", None, lo=0.0),
        command=command,
    )


def _faults(node: Node) -> FaultPolicy:
    node.mapping(("retries", "backoff_first", "backoff_max", "give_up"), optional=True)
    first = node["backoff_first"].quantity("time", 0.5, lo=0.001, hi=3600.0)
    biggest = node["backoff_max"].quantity("time", 30.0, lo=0.001, hi=86400.0)
    if biggest < first:
        node["backoff_max"].fail(f"must be at least backoff_first ({first:g} s), got "
                                 f"{biggest:g} s")
    return FaultPolicy(
        retries=node["retries"].integer(2, lo=0, hi=100),
        backoff_first_s=first,
        backoff_max_s=biggest,
        give_up_s=node["give_up"].quantity("time", None, lo=1.0),
    )


def _size(node: Node, default: int) -> int:
    """A byte count: ``200 MB``, ``1.5 GiB`` or a bare number of bytes."""
    if not node.present:
        return default
    value = node.value
    if isinstance(value, int) and not isinstance(value, bool) and 0 <= value <= _SIZE_LIMIT:
        return value
    match = _SIZE.match(value) if isinstance(value, str) and len(value) <= 40 else None
    size = float(match.group(1)) * _SIZE_FACTORS[match.group(2)] if match else math.inf
    if not size <= _SIZE_LIMIT:
        node.fail(f"must be a size such as 200 MB or 2 GiB (units B, kB, MB, GB, TB, KiB, "
                  f"MiB, GiB, TiB) up to 1 PiB, got {show(value)}")
    return int(size)
