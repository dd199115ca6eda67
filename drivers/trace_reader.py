"""Sweeps and trace data: trigger, wait, read each S-parameter, build the frequency axis.

Each trace is received straight into its column of the result (in place for REAL,64
re/im pairs in the host's byte order), so a sweep costs one buffer per trace.

Besides the S-parameters of ``data.traces``, a sweep may read the analyzer's switch terms
(``switch.forward``, ``switch.reverse``) when the dialect declares ``data.switch_terms``:
they are traces like the others (same query, format, layout). Where the dialect defines
measurements, a switch term's measurement is defined only when it is first asked for
(before the sweep's trigger), and removed on close with the others.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from drivers.blocks import VALUE_SIZE, check_finite, decode_ascii, decode_binary, surely_finite
from drivers.conversation import Conversation
from drivers.deadline import Deadline
from drivers.dialect_model import SWITCH_TERMS, Dialect, FrequencyAxis, PollSpec
from drivers.errors import BlockError, DialectError, InstrumentTimeout, ReplyError
from drivers.format_choice import FormatChoice
from drivers.layouts import FREQ_PREFIX, split_frequency, to_complex, values_per_point
from drivers.replies import parse_number, same_token
from drivers.stimulus import S_PARAMETERS, Stimulus
from drivers.templates import Template

SWEEP_TIME_MARGIN = 2.0  # wait up to twice the reported sweep time on top of the I/O timeout


class TraceReader:
    """Triggers sweeps and reads traces for one analyzer."""

    def __init__(self, talk: Conversation, formats: FormatChoice,
                 applied: Callable[[], Stimulus]) -> None:
        self.talk = talk
        self.formats = formats
        self.applied = applied
        self.sweep_time_s = 0.0
        self.sweep_pending = False
        self._scratch = bytearray()
        # checked name -> (select commands, chained trigger + query, query alone)
        self._commands: dict[str, tuple[tuple[str, ...], str, str]] = {}
        self._grid: tuple[Stimulus, np.ndarray] | None = None
        self._trace_axis: np.ndarray | None = None  # frequencies sent inside the last trace
        self.defined_extra: list[str] = []  # switch terms whose measurement is defined

    def sweep(self, params: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
        """Trigger one sweep, wait for it and read ``params`` (see ``Analyzer.sweep``)."""
        names = self.check_params(params)
        self._define_extra(names)
        points = self.applied().points
        data = np.empty((len(names), points), dtype=np.complex128)
        first = 0
        if self.talk.dialect.wait == "wai":
            self.sweep_pending = True
            select, chained, _query = self._command_pair(names[0])
            self._read_named(names[0], select, chained, data[0])
            first = 1
        else:
            self.trigger()
        for index in range(first, len(names)):
            select, _chained, query = self._command_pair(names[index])
            self._read_named(names[index], select, query, data[index])
        return self._frequencies(points), data.T

    def trigger(self) -> None:
        """Start one sweep; with ``wait: opc`` also wait until it is complete."""
        d = self.talk.dialect
        if d.wait == "wai":
            assert d.wai is not None
            self.talk.write(f"{d.trigger.render()};{d.wai.render()}")
            self.sweep_pending = True
        elif d.wait == "poll":
            self.talk.write(d.trigger.render())
            wait_by_polling(self.talk, self.sweep_timeout(), self.sweep_time_s)
        else:
            self.talk.write(d.trigger.render())
            self.talk.wait_opc(d.trigger.text, self.sweep_timeout())

    def read_traces(self, params: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
        """Read ``params`` from the last sweep (after ``trigger``); same shapes as ``sweep``."""
        names = self.check_params(params)
        self._define_extra(names)
        points = self.applied().points
        data = np.empty((len(names), points), dtype=np.complex128)
        for name, row in zip(names, data, strict=True):
            select, _chained, query = self._command_pair(name)
            self._read_named(name, select, query, row)
        return self._frequencies(points), data.T

    def check_params(self, params: Sequence[str]) -> list[str]:
        if isinstance(params, str):
            params = [params]
        names = list(params)
        if len(names) == 1 and names[0] in self._commands:
            return names  # the common case, already checked once
        dialect = self.talk.dialect
        if not names:
            raise DialectError(f"{dialect.source}: no S-parameters asked for")
        for name in names:
            if name in SWITCH_TERMS:
                if name not in dialect.switch_terms:
                    raise DialectError(
                        f"{dialect.source}: data.switch_terms is not given, so the "
                        f"analyzer's switch terms ({name}) cannot be read"
                    )
                continue
            if name not in S_PARAMETERS:
                raise DialectError(
                    f"not an S-parameter: {name!r}; known: {', '.join(S_PARAMETERS)}"
                )
            if name not in dialect.traces:
                raise DialectError(
                    f"{dialect.source}: data.traces has no token for {name} "
                    f"(has {', '.join(dialect.traces)})"
                )
        if len(set(names)) != len(names):
            raise DialectError(f"S-parameters asked for twice: {', '.join(names)}")
        return names

    def _command_pair(self, name: str) -> tuple[tuple[str, ...], str, str]:
        """The commands that read ``name``: its select commands (sent on their own first),
        trigger + ``*WAI`` + query in one message, and the query alone."""
        pair = self._commands.get(name)
        if pair is None:
            d = self.talk.dialect
            tokens = trace_tokens(d, name)
            query = d.trace_query.render(**tokens)
            chained = f"{d.trigger.render()};{d.wai.render()};{query}" if d.wai else query
            select = d.measurement.select if d.measurement else ()
            pair = (tuple(t.render(**tokens) for t in select), chained, query)
            self._commands[name] = pair
        return pair

    def define_measurements(self) -> None:
        """Send the dialect's define commands once for every trace of ``data.traces``
        (switch terms are defined when first asked for, see ``_define_extra``)."""
        spec = self.talk.dialect.measurement
        self.defined_extra = []  # defined again when next asked for (safe after a preset)
        self._per_trace(self.talk.dialect.traces, spec.define if spec else (),
                        self.talk.send_setting)

    def cleanup_measurements(self) -> None:
        """Send the dialect's cleanup commands for every trace defined (on close)."""
        spec = self.talk.dialect.measurement
        names = [*self.talk.dialect.traces, *self.defined_extra]
        self.defined_extra = []
        self._per_trace(names, spec.cleanup if spec else (), self.talk.write)

    def _define_extra(self, names: Sequence[str]) -> None:
        """Define the measurement of each switch term in ``names`` not yet defined."""
        spec = self.talk.dialect.measurement
        if spec is None or not spec.define:
            return
        new = [n for n in names if n in SWITCH_TERMS and n not in self.defined_extra]
        self._per_trace(new, spec.define, self.talk.send_setting)
        self.defined_extra += new

    def _per_trace(self, names: Sequence[str], templates: tuple[Template, ...],
                   send: Callable[[str], None]) -> None:
        for name in names if templates else ():
            tokens = trace_tokens(self.talk.dialect, name)
            for template in templates:
                send(template.render(**tokens))

    def sweep_timeout(self) -> float:
        return self.talk.transport.timeout_s + SWEEP_TIME_MARGIN * self.sweep_time_s

    def _read_named(self, name: str, select: tuple[str, ...], command: str,
                    row: np.ndarray) -> None:
        """``_read_trace``; a switch term that cannot be read names its dialect key (an
        instrument without such a trace answers nothing or an error)."""
        if name not in SWITCH_TERMS:
            self._read_trace(select, command, row)
            return
        try:
            self._read_trace(select, command, row)
        except (InstrumentTimeout, ReplyError) as exc:
            key = f"data.switch_terms.{name.split('.', 1)[1]}"
            raise type(exc)(f"{exc} (reading {name}: check {key} in "
                            f"{self.talk.dialect.source})") from None

    def _read_trace(self, select: tuple[str, ...], command: str, row: np.ndarray) -> None:
        """Send ``command`` and read its trace reply into ``row`` (complex128, n points)."""
        for line in select:
            self.talk.write(line)
        timeout = self.sweep_timeout() if self.sweep_pending else None
        self.sweep_pending = False
        fmt = self.formats.format
        if fmt is None:
            raise ReplyError(f"instrument {self.talk.resource}: not opened")
        transport, points = self.talk.transport, row.size
        layout = self.talk.dialect.layout
        per_point = values_per_point(layout)
        count = points * per_point
        what = f"{points} points x {per_point} values of {fmt.encoding}"
        if fmt.encoding == "ascii":
            self.talk.ask(command)
            text = self.talk.clean(transport.read_line(command, timeout))
            values = self._decode(lambda: decode_ascii(text, count, what), command)
            self._to_row(values, layout, row)
            return
        size = count * VALUE_SIZE[fmt.encoding]
        in_place = self.formats.in_place
        if in_place:
            target = memoryview(row).cast("B")  # complex128 in memory order: receive in place
        else:
            if len(self._scratch) != size:
                self._scratch = bytearray(size)
            target = memoryview(self._scratch)
        if self.talk.quirks.read_request is None:
            transport.query_block(command, size, target, timeout, what)
        else:
            self.talk.ask(command)
            transport.read_block(command, size, target, timeout, what)
        if in_place:
            flat = row.view(np.float64)
            if not surely_finite(flat):
                self._decode(lambda: check_finite(flat), command)
            return
        order = self.formats.order
        values = self._decode(
            lambda: decode_binary(target, fmt.encoding, order, count, what), command
        )
        self._to_row(values, layout, row)

    def _to_row(self, values: np.ndarray, layout: str, row: np.ndarray) -> None:
        """Convert into ``row``; keep the frequencies of a ``freq_`` layout for the axis."""
        if layout.startswith(FREQ_PREFIX):
            self._trace_axis, values, layout = split_frequency(values, layout)
        to_complex(values, layout, out=row)

    def _decode(self, decode: Any, command: str) -> Any:
        try:
            return decode()
        except BlockError as exc:
            raise BlockError(f"instrument {self.talk.resource}: '{command}' {exc}") from None

    def _frequencies(self, points: int) -> np.ndarray:
        axis = self.talk.dialect.frequency
        applied = self.applied()
        if axis is None:
            grid = self._grid
            if grid is None or grid[0] is not applied:
                grid = self._grid = (applied, applied.frequencies())
            return grid[1].copy()
        if axis.kind == "edges":
            return self._axis_from_edges(axis, points)
        if axis.kind == "trace":
            assert self._trace_axis is not None  # every trace read sets it
            return self._increasing(self._trace_axis * axis.scale, "the trace's frequencies")
        assert axis.query is not None
        command = axis.query.render()
        what = f"{points} frequencies"
        if axis.encoding == "ascii":
            text = self.talk.query(command)
            values = self._decode(lambda: decode_ascii(text, points, what), command)
        else:
            target = memoryview(bytearray(points * VALUE_SIZE[axis.encoding]))
            self.talk.ask(command)
            self.talk.transport.read_block(command, len(target), target, None, what)
            values = self._decode(
                lambda: decode_binary(target, axis.encoding, axis.byte_order, points, what),
                command,
            )
        return self._increasing(values * axis.scale, f"'{command}' frequencies")

    def _increasing(self, freq: np.ndarray, what: str) -> np.ndarray:
        if freq.size > 1 and not np.all(np.diff(freq) > 0):
            raise ReplyError(
                f"instrument {self.talk.resource}: {what} are not strictly increasing"
            )
        return freq

    def _axis_from_edges(self, axis: FrequencyAxis, points: int) -> np.ndarray:
        assert axis.start and axis.stop and axis.points
        start = self.talk.number(axis.start.render(), scale=axis.scale)
        stop = self.talk.number(axis.stop.render(), scale=axis.scale)
        count = int(self.talk.number(axis.points.render(), integer=True))
        if count != points or start <= 0 or (points > 1 and not stop > start):
            raise ReplyError(
                f"instrument {self.talk.resource}: frequency axis {start:.12g}..{stop:.12g} Hz "
                f"in {count} points ('{axis.start.text}', '{axis.stop.text}', "
                f"'{axis.points.text}') does not fit a sweep of {points} points"
            )
        return np.linspace(start, stop, points)


def trace_tokens(dialect: Dialect, name: str) -> dict[str, str]:
    """The placeholders for trace ``name`` (see ``Dialect.trace_tokens``)."""
    return dialect.trace_tokens(name)


def wait_by_polling(talk: Conversation, timeout_s: float, sweep_time_s: float) -> None:
    """Ask the dialect's poll query until it says done, within ``timeout_s``."""
    spec = talk.dialect.poll
    assert spec is not None
    if spec.arm is not None:
        talk.write(spec.arm.render())
    command = spec.query.render()
    deadline = Deadline(timeout_s)
    polls = 0
    while True:
        reply = talk.query(command)
        polls += 1
        if poll_done(spec, reply, talk.where(command)):
            return
        if deadline.expired():
            raise InstrumentTimeout(
                f"instrument {talk.resource}: '{command}' still not done after {timeout_s:.3g} s "
                f"({polls} polls; sweep time {sweep_time_s:.3g} s)"
            )
        time.sleep(min(spec.interval_s, deadline.remaining() or spec.interval_s))


def poll_done(spec: PollSpec, reply: str, where: str) -> bool:
    """True when ``reply`` to the poll query says the sweep is complete."""
    if spec.done_reply is not None:
        return same_token(reply, spec.done_reply)
    assert spec.done_bit is not None
    register = parse_number(reply, where, integer=True)
    if not 0 <= register <= 0xFFFF:
        raise ReplyError(f"{where} status register {register} is outside 0..65535")
    return bool((int(register) >> spec.done_bit) & 1) == spec.done_when_set
