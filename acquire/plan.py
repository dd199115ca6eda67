"""Test plans: load a YAML plan, validate every field, and return an immutable ``Plan``.

Everything is checked before any instrument is touched. Each problem is reported as one
line naming the file, the key path, what is wrong and what is allowed. No string from a
plan is ever sent to an instrument: S-parameter names are checked against a fixed set and
mapped to trace tokens by the dialect, and all other values reach the driver as numbers.
"""

from __future__ import annotations

import re
import string
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from acquire.errors import ConfigError, PlanError
from acquire.library import find_config
from acquire.yamlfile import Node, load_yaml, show
from drivers.dialect_model import STANDARDS
from drivers.resources import resource_problem
from drivers.stimulus import S_PARAMETERS, Stimulus

MAX_POINTS = 200_001
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$")
ONE_PORT = ("S11",)
TWO_PORT = ("S11", "S21", "S12", "S22")
NAME_FIELDS = {"plan", "serial", "time", "verdict", "index", "station"}
PROMPTS = ("terminal", "command", "switch", "scripted")
SITE_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.:+-]{0,31}$")


@dataclass(frozen=True)
class InstrumentSpec:
    """Where the analyzer is and how to talk to it."""

    resource: str
    dialect: Path
    timeout_s: float = 5.0
    connect_timeout_s: float = 5.0
    data_format: str | None = None  # None: the dialect's preferred (binary where allowed)
    byte_order: str | None = None  # None: the dialect's preferred
    baud_rate: int | None = None  # serial resources only
    max_sweep_time_s: float = 120.0  # an instrument claiming a longer sweep is refused


@dataclass(frozen=True)
class TouchstoneSpec:
    version: str = "1.1"
    fmt: str = "RI"
    freq_unit: str = "Hz"
    precision: int | None = None


@dataclass(frozen=True)
class OutputSpec:
    """Where results go and how files are named (``{plan}-{serial}-{time}``)."""

    dir: Path
    name: str = "{plan}-{serial}-{time}"
    touchstone: TouchstoneSpec = field(default_factory=TouchstoneSpec)
    keep_raw: bool = False


@dataclass(frozen=True)
class CalibrationSpec:
    """How the plan is calibrated and which cal sets it accepts."""

    method: str = "one-port"
    kit: Path = Path("ideal.yaml")
    max_age_s: float = 8 * 3600.0
    reference_plane: str = "end of the test cable"
    cal_dir: Path | None = None  # None: the plan's own output folder + /cal (see cal_dir_for)
    power_mismatch: str = "refuse"  # refuse | warn
    if_bandwidth_mismatch: str = "warn"  # refuse | warn
    allow_interpolation: bool = False
    prompt: str = "terminal"
    switch_command: str | None = None
    required: bool = True
    isolation: bool = False  # two-port methods: a step with loads on both ports
    switch_names: dict[str, str] = field(default_factory=dict)  # ours -> the fixture tool's


@dataclass(frozen=True)
class Plan:
    """A validated test plan.

    Paths written in the plan (``output.dir``, ``calibration.dir``, files named by checks,
    station and soak sections) are taken from the plan file's folder; a path given on the
    command line is taken from the working folder by the command that reads it.
    """

    name: str
    source: Path
    instrument: InstrumentSpec
    stimulus: Stimulus
    measure: tuple[str, ...]
    output: OutputSpec
    calibration: CalibrationSpec | None = None
    checks: tuple[Any, ...] = ()
    description: str = ""
    sections: dict[str, Any] = field(default_factory=dict)  # raw later sections (station, soak)
    decision: Any = None  # acquire.uncertainty.DecisionRule (None: simple acceptance)

    @property
    def ports(self) -> int:
        return 2 if len(self.measure) > 1 else 1


SECTIONS = (
    "plan", "description", "instrument", "stimulus", "measure", "calibration", "checks",
    "output", "schedule", "station", "soak", "dtf", "decision",
)


def load_plan(path: Path | str) -> Plan:
    """Read and validate a plan file; raises ``PlanError`` with one clear line."""
    path = Path(path)
    if path.is_dir():
        raise PlanError(f"plan {path}: is a folder, expected a YAML file")
    raw = load_yaml(path, "plan", PlanError)
    root = Node(raw, f"plan {path}", error=PlanError, base_dir=path.resolve().parent)
    return parse_plan(root, path)


def parse_plan(root: Node, source: Path) -> Plan:
    root.mapping(SECTIONS, required=("plan", "instrument", "stimulus"))
    name = root["plan"].text()
    if not _NAME.match(name):
        root["plan"].fail(
            f"must be 1-64 letters, digits, '.', '_' or '-' (starting with a letter or digit), "
            f"got {show(name)}"
        )
    measure = _measure(root["measure"])
    calibration = _calibration(root["calibration"])
    return Plan(
        name=name,
        source=source,
        description=root["description"].text(""),
        instrument=_instrument(root["instrument"]),
        stimulus=_stimulus(root["stimulus"]),
        measure=measure,
        output=_output(root["output"], name),
        calibration=calibration,
        checks=_checks(root["checks"], root["dtf"]),
        sections={key: root[key] for key in ("schedule", "station", "soak", "dtf")
                  if root[key].present},
        decision=_decision(root["decision"]),
    )


def _decision(node: Node) -> Any:
    """The ``decision:`` section (acquire/uncertainty/decision.py documents it)."""
    from acquire.uncertainty.decision import parse_decision

    return parse_decision(node)


def _instrument(node: Node) -> InstrumentSpec:
    node.mapping(
        ("resource", "dialect", "timeout", "connect_timeout", "data_format", "byte_order",
         "baud_rate", "max_sweep_time"),
        required=("resource",),
    )
    resource = node["resource"].text()
    problem = resource_problem(resource)
    if problem is not None:
        node["resource"].fail(f"not a supported VISA resource string: {show(resource)} ({problem})")
    dialect_ref = node["dialect"].text("scpi-generic")
    try:
        dialect = find_config("dialects", dialect_ref, node.base_dir)
    except ConfigError as exc:
        node["dialect"].fail(str(exc))
    return InstrumentSpec(
        resource=resource,
        dialect=dialect,
        timeout_s=node["timeout"].quantity("time", 5.0, lo=0.01, hi=3600),
        connect_timeout_s=node["connect_timeout"].quantity("time", 5.0, lo=0.01, hi=600),
        data_format=node["data_format"].text(None, choices=("ascii", "real32", "real64")),
        byte_order=node["byte_order"].text(None, choices=("big", "little")),
        baud_rate=node["baud_rate"].integer(None, lo=50, hi=10_000_000),
        max_sweep_time_s=node["max_sweep_time"].quantity("time", 120.0, lo=0.001, hi=86_400),
    )


def _stimulus(node: Node) -> Stimulus:
    node.mapping(
        ("start", "stop", "center", "span", "points", "power", "if_bandwidth", "averaging"),
        required=("points", "power", "if_bandwidth"),
    )
    by_edges = node["start"].present or node["stop"].present
    by_center = node["center"].present or node["span"].present
    if by_edges == by_center:
        node.fail("give either start and stop, or center and span")
    if by_edges:
        start = node["start"].quantity("frequency", lo=1.0)
        stop = node["stop"].quantity("frequency", lo=1.0)
    else:
        center = node["center"].quantity("frequency", lo=1.0)
        span = node["span"].quantity("frequency", lo=0.0)
        start, stop = center - span / 2, center + span / 2
        if start <= 0:
            node["span"].fail(f"span {span:g} Hz reaches below 0 Hz around center {center:g} Hz")
    points = node["points"].integer(lo=1, hi=MAX_POINTS)
    if start > stop or (points > 1 and start == stop):
        node["stop"].fail("must be above start")
    return Stimulus(
        start_hz=start,
        stop_hz=stop,
        points=points,
        power_dbm=node["power"].quantity("power", lo=-150.0, hi=30.0),
        if_bandwidth_hz=node["if_bandwidth"].quantity("frequency", lo=0.1, hi=100e6),
        averaging=node["averaging"].integer(1, lo=1, hi=10_000),
    )


def _measure(node: Node) -> tuple[str, ...]:
    if not node.present:
        return ONE_PORT
    if isinstance(node.value, str):
        shortcuts = {"one-port": ONE_PORT, "two-port": TWO_PORT}
        return shortcuts.get(node.text(choices=(*shortcuts, *S_PARAMETERS)), (node.value,))
    names = [n.text(choices=S_PARAMETERS) for n in node.elements(min_len=1)]
    if len(set(names)) != len(names):
        node.fail(f"lists an S-parameter twice: {names}")
    if tuple(names) == ONE_PORT or set(names) == set(TWO_PORT):
        return ONE_PORT if len(names) == 1 else TWO_PORT
    node.fail(f"must be [S11] (one-port) or all of S11, S21, S12, S22 (two-port), got {names}")


def _output(node: Node, plan_name: str) -> OutputSpec:
    node.mapping(("dir", "name", "touchstone", "keep_raw"), optional=True)
    out_dir = node["dir"].file_path(None) or (node.base_dir or Path()) / "results"
    name = node["name"].text("{plan}-{serial}-{time}")
    _check_template(node["name"], name)
    ts = node["touchstone"]
    ts.mapping(("version", "format", "frequency_unit", "precision"), optional=True)
    precision_node = ts["precision"]
    precision: int | None = None
    if precision_node.present and precision_node.value != "full":
        precision = precision_node.integer(lo=6, hi=17)
    elif precision_node.present:
        precision = 17
    version = ts["version"].value if ts["version"].present else "1.1"
    if isinstance(version, bool) or version not in ("1.1", "2.0", "2", 1.1, 2.0):
        ts["version"].fail(f"must be 1.1 or 2.0, got {show(version)}")
    return OutputSpec(
        dir=out_dir,
        name=name,
        touchstone=TouchstoneSpec(
            version="2.0" if str(version).startswith("2") else "1.1",
            fmt=ts["format"].text("RI", choices=("RI", "MA", "DB")),
            freq_unit=ts["frequency_unit"].text("Hz", choices=("Hz", "kHz", "MHz", "GHz")),
            precision=precision,
        ),
        keep_raw=node["keep_raw"].boolean(False),
    )


def _check_template(node: Node, template: str) -> None:
    try:
        fields = {f for _, f, spec, conv in string.Formatter().parse(template) if f is not None}
    except ValueError as exc:
        node.fail(f"bad name template {show(template)}: {exc}")
    unknown = fields - NAME_FIELDS
    if unknown or "" in fields:
        node.fail(
            f"unknown field(s) {sorted(unknown) or ['{}']} in {show(template)}; "
            f"allowed: {', '.join(sorted(NAME_FIELDS))}"
        )
    if "/" in template or "\\" in template or template.startswith("."):
        node.fail(f"must be a file name, not a path: {show(template)}")


def _calibration(node: Node) -> CalibrationSpec | None:
    if not node.present:
        return None
    node.mapping(
        ("method", "kit", "max_age", "reference_plane", "dir", "power_mismatch",
         "if_bandwidth_mismatch", "allow_interpolation", "prompt", "switch", "required",
         "isolation"),
    )
    # the method registry brings numpy: only plans with a calibration section load it
    from acquire.calibration.methods import ALIASES, METHODS, canonical_name

    method = node["method"].text("one-port", choices=(*METHODS, "none", *ALIASES))
    if method == "none":
        return None
    where = node["method"]
    method = canonical_name(method, f"{where.source}: {where.path}")
    try:
        kit = find_config("calkits", node["kit"].text("ideal"), node.base_dir)
    except ConfigError as exc:
        node["kit"].fail(str(exc))
    switch = node["switch"]
    switch.mapping(("command", "names"), optional=True)
    switch_command = switch["command"].text(None)
    switch_names = _switch_names(switch["names"])
    if switch_command is not None and "{standard}" not in switch_command:
        switch["command"].fail("must contain {standard}, e.g. 'fixturectl connect {standard}'")
    prompt = node["prompt"].text("command" if switch_command else "terminal", choices=PROMPTS)
    if prompt == "command" and switch_command is None:
        node["prompt"].fail("'command' needs switch.command in the calibration section")
    return CalibrationSpec(
        method=method,
        kit=kit,
        max_age_s=node["max_age"].quantity("time", 8 * 3600.0, lo=1.0),
        reference_plane=node["reference_plane"].text("end of the test cable"),
        cal_dir=node["dir"].file_path(None),
        power_mismatch=node["power_mismatch"].text("refuse", choices=("refuse", "warn")),
        if_bandwidth_mismatch=node["if_bandwidth_mismatch"].text(
            "warn", choices=("refuse", "warn")
        ),
        allow_interpolation=node["allow_interpolation"].boolean(False),
        prompt=prompt,
        switch_command=switch_command,
        required=node["required"].boolean(True),
        isolation=_isolation(node["isolation"], METHODS[method]),
        switch_names=switch_names,
    )


def _switch_names(node: Node) -> dict[str, str]:
    """``calibration.switch.names``: our standard names -> the site fixture tool's."""
    if not node.present:
        return {}
    node.mapping(STANDARDS)
    names = {}
    for key, child in node.items():
        name = child.text()
        problem = site_name_problem(name)
        if problem:
            child.fail(problem)
        names[key] = name
    return names


def site_name_problem(name: object) -> str | None:
    """Why ``name`` cannot stand for a fixture position in a switch command, or None."""
    if isinstance(name, str) and SITE_NAME.match(name):
        return None
    return (f"must be 1-32 letters, digits or _ . : + - (starting with a letter or digit), "
            f"got {show(name)}"[:160])


def _isolation(node: Node, method: Any) -> bool:
    """``isolation: true`` adds a step with loads on both ports (two-port methods only)."""
    wanted = node.boolean(False)
    if wanted and not method.needs_thru:
        node.fail(f"method {method.name} corrects no transmission: no isolation to measure")
    return wanted


def _checks(node: Node, dtf: Node) -> tuple[Any, ...]:
    checks: tuple[Any, ...] = ()
    if node.present and node.value is not None:
        from acquire.check_parse import parse_checks

        checks = tuple(parse_checks(node))
    if dtf.present:  # distance-to-fault settings: defaults for the distance checks
        from acquire.timedomain.checks import apply_plan_settings

        checks = apply_plan_settings(checks, dtf)
    return checks
