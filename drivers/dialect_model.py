"""The validated form of a dialect file: what the analyzer adapter reads, nothing else.

Parsing lives in ``drivers.dialect_parse``, loading by name in ``drivers.dialect``; this
module imports neither, so the three form no cycle.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path

from drivers.errors import DialectError
from drivers.templates import Template

SETTING_NAMES: tuple[str, ...] = ("start", "stop", "points", "power", "if_bandwidth", "averaging")
REQUIRED_SETTINGS: tuple[str, ...] = ("start", "stop", "points", "power", "if_bandwidth")
STANDARDS: tuple[str, ...] = ("open", "short", "load", "thru", "device")
WAIT_MODES: tuple[str, ...] = ("wai", "opc", "poll")
IDENTITY_FIELDS: tuple[str, ...] = ("maker", "model", "serial", "firmware", "skip")
SWITCH_REPLIES: tuple[str, ...] = ("flag", "token")
# The analyzer's switch terms, read as traces when the dialect declares data.switch_terms:
# a2/b2 with port 1 driving, a1/b1 with port 2 driving (the cal set's raw reading names).
SWITCH_TERMS: tuple[str, ...] = ("switch.forward", "switch.reverse")


@dataclass(frozen=True)
class SettingSpec:
    """How one stimulus setting is sent and read back.

    ``scale`` is SI units per instrument unit (1e6 when the instrument speaks MHz);
    ``read_scale`` the same for the read-back when the instrument answers in another unit.
    A read-back value matches when ``|read - sent| <= absolute + relative * |sent|`` (SI).
    """

    name: str
    set: tuple[Template, ...]  # empty for a fixed setting
    query: Template | None  # None for a fixed setting
    integer: bool
    scale: float = 1.0
    read_scale: float = 1.0  # SI units per unit of the read-back (another unit than set)
    absolute: float = 0.0
    relative: float = 0.0
    state_on: str | None = None  # averaging only: token for {state} when averaging > 1
    state_off: str | None = None
    state_query: Template | None = None
    fixed: float | None = None  # the instrument's unchangeable value (SI), when it has one

    def matches(self, sent: float, read: float) -> bool:
        return abs(read - sent) <= self.absolute + self.relative * abs(sent)


@dataclass(frozen=True)
class DataFormat:
    """One data encoding the instrument offers: how to select it and its read-back."""

    encoding: str  # ascii | real32 | real64
    set: Template | None
    reply: str | None

    @property
    def binary(self) -> bool:
        return self.encoding != "ascii"


@dataclass(frozen=True)
class ByteOrders:
    """How binary values are ordered; either fixed or selectable by command."""

    preferred: str  # big | little
    fixed: bool
    query: Template | None = None
    set_big: Template | None = None
    reply_big: str | None = None
    set_little: Template | None = None
    reply_little: str | None = None

    def command(self, order: str) -> tuple[Template | None, str | None]:
        return (
            (self.set_big, self.reply_big)
            if order == "big"
            else (self.set_little, self.reply_little)
        )


@dataclass(frozen=True)
class SwitchSpec:
    """The automatic standard switch: a command and a token per standard."""

    set: Template
    query: Template | None
    reply: str  # flag: the query answers 1/0 for {standard}; token: it answers the token
    tokens: Mapping[str, str]


@dataclass(frozen=True)
class MeasurementSpec:
    """Measurements an instrument must define and select before a trace can be read.

    ``tokens[S]`` holds the validated tokens of S-parameter ``S`` (e.g. a measurement
    number and a name), and of each switch term the dialect declares (``switch.forward``,
    ``switch.reverse``); every template may use them, and ``{trace}`` (``data.traces``,
    ``data.switch_terms``).
    """

    define: tuple[Template, ...]
    select: tuple[Template, ...]
    cleanup: tuple[Template, ...]
    tokens: Mapping[str, Mapping[str, str]]


@dataclass(frozen=True)
class PollSpec:
    """Completion by polling: ask ``query`` until a status bit is set or a reply says done."""

    query: Template
    arm: Template | None  # sent once after the trigger (e.g. *OPC to set ESR bit 0 later)
    done_bit: int | None
    done_reply: str | None
    interval_s: float
    done_when_set: bool = True  # done_bit: done when the bit is set (False: when clear)


@dataclass(frozen=True)
class FrequencyAxis:
    """Where the frequency axis comes from when not from the settings read back.

    ``list``: ``query`` answers every frequency (ASCII or a binary block of ``encoding``);
    ``edges``: ``start``, ``stop`` and ``points`` queries give a linear axis;
    ``trace``: each trace carries its frequencies (a ``freq_`` layout).
    ``scale`` is Hz per instrument unit.
    """

    kind: str  # list | edges | trace
    scale: float
    query: Template | None = None
    encoding: str = "ascii"
    byte_order: str = "big"
    start: Template | None = None
    stop: Template | None = None
    points: Template | None = None


@dataclass(frozen=True)
class Quirks:
    """Habits seen in the field that the conversation has to allow for."""

    unquote: bool = False  # replies wrapped in "..." or '...'
    strip_padding: bool = False  # blanks and NUL bytes around replies
    unit_suffixes: bool = False  # numbers read back as '2.4 GHZ', '-10 DBM'
    read_request: Template | None = None  # sent after each query before its reply is read
    delays: tuple[tuple[str, float], ...] = ()  # (command prefix, seconds to wait after it)


@dataclass(frozen=True)
class IdentitySpec:
    """How the identity reply splits into maker, model, serial and firmware."""

    separator: str = ","
    fields: tuple[str, ...] = ("maker", "model", "serial", "firmware")


@dataclass(frozen=True)
class Dialect:
    """Everything the analyzer adapter needs to drive one kind of instrument."""

    name: str
    path: Path
    description: str
    write_termination: str
    read_termination: str
    identity: Template
    clear: Template | None
    opening: tuple[Template, ...]
    opc_query: Template | None  # required by the parser where it is used
    opc_after_setting: bool
    settings: Mapping[str, SettingSpec]
    formats: tuple[DataFormat, ...]
    format_query: Template | None
    byte_orders: ByteOrders | None
    layout: str
    trace_query: Template
    traces: Mapping[str, str]
    frequency: FrequencyAxis | None
    trigger: Template
    wait: str  # wai | opc | poll
    wai: Template | None
    sweep_time_query: Template | None
    error_query: Template
    error_none_code: int
    error_max_entries: int
    switch: SwitchSpec | None
    poll: PollSpec | None = None
    measurement: MeasurementSpec | None = None
    quirks: Quirks = Quirks()
    identity_reply: IdentitySpec = IdentitySpec()
    sweep_time_scale: float = 1.0
    # reading name in SWITCH_TERMS -> trace token; empty when the dialect declares none
    switch_terms: Mapping[str, str] = field(default_factory=dict)

    @property
    def source(self) -> str:
        """``dialect <path>``: the prefix of every message about this file."""
        return f"dialect {shown_path(self.path)}"

    @property
    def frequency_query(self) -> Template | None:
        """The axis list query, when the axis is read as a list (else None)."""
        axis = self.frequency
        return axis.query if axis is not None and axis.kind == "list" else None

    @property
    def frequency_scale(self) -> float:
        """Hz per instrument unit of the frequency axis."""
        return self.frequency.scale if self.frequency is not None else 1.0

    def trace_tokens(self, name: str) -> dict[str, str]:
        """The placeholders for trace ``name`` (an S-parameter of ``data.traces`` or a
        switch term of ``data.switch_terms``): ``{trace}`` and its measurement tokens."""
        token = self.traces.get(name) or self.switch_terms.get(name)
        if token is None:
            raise DialectError(f"{self.source}: no trace token for {name}")
        tokens = {"trace": token}
        if self.measurement is not None:
            tokens.update(self.measurement.tokens[name])
        return tokens

    def data_format(self, encoding: str) -> DataFormat:
        for fmt in self.formats:
            if fmt.encoding == encoding:
                return fmt
        offered = ", ".join(f.encoding for f in self.formats)
        raise DialectError(
            f"{self.source}: data.formats offers {offered}; '{encoding}' is not one of them"
        )


def shown_path(path: Path) -> Path:
    """``path`` relative to the working folder when it lies inside it (shorter messages)."""
    try:
        return path.resolve().relative_to(Path.cwd())
    except (ValueError, OSError):
        return path
