"""The validated form of a dialect file: what the analyzer adapter reads, nothing else.

Parsing lives in ``drivers.dialect_parse``, loading by name in ``drivers.dialect``; this
module imports neither, so the three form no cycle.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

from drivers.errors import DialectError
from drivers.templates import Template

SETTING_NAMES: tuple[str, ...] = ("start", "stop", "points", "power", "if_bandwidth", "averaging")
REQUIRED_SETTINGS: tuple[str, ...] = ("start", "stop", "points", "power", "if_bandwidth")
STANDARDS: tuple[str, ...] = ("open", "short", "load", "thru", "device")
WAIT_MODES: tuple[str, ...] = ("wai", "opc")
SWITCH_REPLIES: tuple[str, ...] = ("flag", "token")


@dataclass(frozen=True)
class SettingSpec:
    """How one stimulus setting is sent and read back.

    ``scale`` is SI units per instrument unit (1e6 when the instrument speaks MHz).
    A read-back value matches when ``|read - sent| <= absolute + relative * |sent|`` (SI).
    """

    name: str
    set: tuple[Template, ...]
    query: Template
    integer: bool
    scale: float = 1.0
    absolute: float = 0.0
    relative: float = 0.0
    state_on: str | None = None  # averaging only: token for {state} when averaging > 1
    state_off: str | None = None
    state_query: Template | None = None

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
    opc_query: Template
    opc_after_setting: bool
    settings: Mapping[str, SettingSpec]
    formats: tuple[DataFormat, ...]
    format_query: Template | None
    byte_orders: ByteOrders | None
    layout: str
    trace_query: Template
    traces: Mapping[str, str]
    frequency_query: Template | None
    frequency_scale: float
    trigger: Template
    wait: str  # wai | opc
    wai: Template | None
    sweep_time_query: Template | None
    error_query: Template
    error_none_code: int
    error_max_entries: int
    switch: SwitchSpec | None

    @property
    def source(self) -> str:
        """``dialect <path>``: the prefix of every message about this file."""
        return f"dialect {shown_path(self.path)}"

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
