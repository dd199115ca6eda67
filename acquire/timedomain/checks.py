"""Distance-domain checks: limits on the reflections found along the cable.

A plan's ``checks:`` list takes ``- distance: {...}`` (the settings of
``acquire.timedomain.spec`` plus ``zones`` or ``mask``), and a mask file with
``domain: distance`` holds the same keys with its ``zones``::

    zones:
      - name: connector region
        from: 0 m
        to: 0.3 m
        lower: 14 dB               # return loss of every reflection here >= 14 dB
      - name: feed line
        from: 0.3 m
        to: end                    # end: the shown (alias-free) range
        quantity: magnitude_db     # or the reflection level itself ...
        upper: -30 dB              # ... at most -30 dB

Rules: only reflections (peaks, see ``acquire.timedomain.peaks``) are judged, each by
the zone its refined position falls in; the skirt of a reflection outside a zone is not
a reflection inside it. The margin is ``RL - lower`` or ``upper - level`` (negative
fails); a reflection exactly on the limit passes. A zone reaching beyond the shown range
is an error (a limit may not judge distances the sweep cannot see). Peaks are searched
down to the lowest limit level even when the listing floor is higher, so a floor never
hides a failure.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

from acquire.checks import Check, CheckResult
from acquire.errors import ConfigError, MaskError
from acquire.library import find_config
from acquire.sweep import Sweep
from acquire.timedomain.peaks import Peak, find_peaks
from acquire.timedomain.spec import SETTING_KEYS, DtfSpec, parse_spec
from acquire.yamlfile import Node, load_yaml
from drivers.errors import SweepdError

QUANTITIES = {"return_loss": "lower", "magnitude_db": "upper"}
ZONE_KEYS = ("name", "from", "to", "quantity", "lower", "upper")
MAX_FAILING_LISTED = 20


@dataclass(frozen=True)
class Zone:
    """A stretch of cable with a limit on the reflections found in it."""

    index: int
    name: str
    from_m: float
    to_m: float | None  # None: to the end of the shown range
    quantity: str  # "return_loss" (lower limit, dB) | "magnitude_db" (upper limit, dB)
    limit_db: float

    @property
    def max_level_db(self) -> float:
        """The highest reflection level the zone allows."""
        return -self.limit_db if self.quantity == "return_loss" else self.limit_db

    def margin(self, peak: Peak) -> float:
        return self.max_level_db - peak.level_db

    def describe(self) -> str:
        to = "end" if self.to_m is None else f"{self.to_m:g} m"
        rule = (f"return loss >= {self.limit_db:g} dB" if self.quantity == "return_loss"
                else f"level <= {self.limit_db:g} dB")
        return f"'{self.name}' {self.from_m:g} m..{to}: {rule}"


@dataclass(frozen=True)
class DistanceCheck(Check):
    """Reflections along the cable against distance zones."""

    spec: DtfSpec
    zones: tuple[Zone, ...]
    label: str = "distance"
    details_extra: dict[str, Any] = field(default_factory=dict)
    pinned: frozenset[str] = frozenset()  # settings given in the plan's check entry
    kind = "distance"

    @property
    def name(self) -> str:
        return self.label

    @property
    def parameters(self) -> frozenset[str]:
        return frozenset({self.spec.parameter})

    def evaluate(self, sweep: Sweep) -> CheckResult:
        try:
            profile = self.spec.profile(sweep)
        except SweepdError as exc:
            raise SweepdError(f"{self.name}: {exc}") from None
        return judge(self, profile)


def judge(check: DistanceCheck, profile) -> CheckResult:
    """Judge a computed profile against the check's zones."""
    lowest = min((z.max_level_db for z in check.zones), default=check.spec.floor_db)
    floor = min(check.spec.floor_db, lowest)
    peaks = find_peaks(profile, floor)
    zones = [_judge_zone(check, z, peaks, profile.shown_range_m, profile.bin_m)
             for z in check.zones]
    verdict = "fail" if any(z["verdict"] == "fail" for z in zones) else "pass"
    failing = [f for z in zones for f in z["failing_peaks"]]
    listed = [p.to_dict() for p in peaks if p.level_db >= check.spec.floor_db]
    details = {"parameter": check.spec.parameter, "axis": profile.axis_dict(),
               "zones": zones, "peaks": listed, **check.details_extra}
    if failing:
        worst = min(failing, key=lambda f: f["margin_db"])
        text = (f"{len(failing)} reflection(s) over the limit, worst {worst['level_db']:.1f} dB "
                f"at {worst['distance_m']:.3f} m in '{worst['zone']}'")
    else:
        text = f"{len(listed)} reflection(s) listed, none over a limit"
    return CheckResult(check.kind, check.name, verdict, f"{check.name} {verdict}: {text}",
                       details)


def _judge_zone(check: DistanceCheck, zone: Zone, peaks: list[Peak], shown_m: float,
                bin_m: float) -> dict[str, Any]:
    to_m = shown_m if zone.to_m is None else zone.to_m
    if to_m > shown_m + bin_m:
        raise SweepdError(
            f"{check.name}: zones[{zone.index}] '{zone.name}' reaches {to_m:g} m, beyond the "
            f"shown range {shown_m:.3f} m; use more sweep points, a narrower span, "
            f"or 'to: end'"
        )
    inside = [p for p in peaks if zone.from_m <= p.distance_m <= to_m]
    margins = [zone.margin(p) for p in inside]
    failing = [
        {**p.to_dict(), "zone": zone.name, "margin_db": m}
        for p, m in zip(inside, margins, strict=True) if m < 0
    ]
    worst = None
    if inside:
        k = min(range(len(inside)), key=margins.__getitem__)
        worst = {**inside[k].to_dict(), "margin_db": margins[k]}
    return {
        "index": zone.index, "name": zone.name, "from_m": zone.from_m, "to_m": to_m,
        "quantity": zone.quantity, QUANTITIES[zone.quantity]: zone.limit_db,
        "verdict": "fail" if failing else "pass", "peaks_judged": len(inside),
        "worst": worst, "failing_peaks": failing[:MAX_FAILING_LISTED],
    }


# -- parsing -------------------------------------------------------------------------


def parse_distance_check(node: Node) -> DistanceCheck:
    """A plan's ``- distance: {...}`` entry (settings, then ``zones`` or ``mask``)."""
    node.mapping((*SETTING_KEYS, "zones", "mask", "name"))
    spec, given = parse_spec(node)
    if node["zones"].present == node["mask"].present:
        node.fail("needs exactly one of zones (limits here) or mask (a distance mask file)")
    if node["mask"].present:
        try:
            path = find_config("masks", node["mask"].text(), node.base_dir)
        except ConfigError as exc:
            node["mask"].fail(str(exc))
        base = load_distance_mask(path)
        return DistanceCheck(base.spec.merged(spec, given), base.zones, base.label,
                             base.details_extra, given)
    zones = parse_zones(node["zones"])
    return DistanceCheck(spec, zones, node["name"].text("distance"), {}, given)


def apply_plan_settings(checks: tuple[Any, ...], node: Node) -> tuple[Any, ...]:
    """Apply a plan's ``dtf:`` section to its distance checks.

    Precedence, lowest first: a distance mask's own settings, the plan's ``dtf:``
    section, the check entry's keys (and, in ``sweepd dtf``, the command line).
    """
    node.mapping(SETTING_KEYS)
    spec, given = parse_spec(node)
    return tuple(
        replace(c, spec=c.spec.merged(spec, given - c.pinned))
        if isinstance(c, DistanceCheck) else c
        for c in checks
    )


def is_distance_mask(data: Any) -> bool:
    """True for a loaded mask document that declares ``domain: distance``."""
    return isinstance(data, dict) and data.get("domain") == "distance"


def load_distance_mask(path) -> DistanceCheck:
    """Read a distance mask file (``domain: distance``); errors name file and key."""
    data = load_yaml(path, "mask", MaskError)
    node = Node(data, f"mask {path}", error=MaskError, base_dir=path.parent)
    return parse_distance_mask(node, default_name=path.stem, source=str(path))


def parse_distance_mask(node: Node, *, default_name: str, source: str) -> DistanceCheck:
    node.mapping(("domain", "name", "description", *SETTING_KEYS, "zones"),
                 required=("domain", "zones"))
    node["domain"].text(choices=("distance",))
    spec, _ = parse_spec(node)
    name = node["name"].text(default_name)
    extra = {"mask": {"name": name, "description": node["description"].text(""),
                      "source": source}}
    return DistanceCheck(spec, parse_zones(node["zones"]), f"distance mask {name}", extra)


def parse_zones(node: Node) -> tuple[Zone, ...]:
    zones = tuple(_zone(i, z) for i, z in enumerate(node.elements(min_len=1)))
    return zones


def _zone(index: int, node: Node) -> Zone:
    node.mapping(ZONE_KEYS, required=("from", "to"))
    quantity = node["quantity"].text("return_loss", choices=tuple(QUANTITIES))
    bound = QUANTITIES[quantity]
    other = "upper" if bound == "lower" else "lower"
    if node[other].present:
        node[other].fail(f"{quantity} takes a{'n' if bound == 'upper' else ''} {bound} limit "
                         f"here, not {other}")
    limit = node[bound].require().quantity("decibel")
    if quantity == "return_loss" and limit < 0:
        node[bound].fail("return loss is positive dB (e.g. 30 dB); for the level use "
                         "quantity: magnitude_db with upper: -30 dB")
    from_m = node["from"].quantity("length", lo=0.0)
    to_m = None if node["to"].value == "end" else node["to"].quantity("length", lo=0.0)
    if to_m is not None and to_m <= from_m:
        node["to"].fail(f"must lie beyond from ({from_m:g} m), or be 'end'")
    return Zone(index, node["name"].text(f"zone {index + 1}"), from_m, to_m, quantity, limit)
