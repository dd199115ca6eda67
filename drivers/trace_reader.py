"""Sweeps and trace data: trigger, wait, read each S-parameter, build the frequency axis.

Each trace is received straight into its column of the result (in place for REAL,64
re/im pairs in the host's byte order), so a sweep costs one buffer per trace.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from drivers.blocks import VALUE_SIZE, check_finite, decode_ascii, decode_binary, surely_finite
from drivers.conversation import Conversation
from drivers.errors import BlockError, DialectError, ReplyError
from drivers.format_choice import FormatChoice
from drivers.layouts import VALUES_PER_POINT, to_complex
from drivers.stimulus import S_PARAMETERS, Stimulus

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
        self._commands: dict[str, tuple[str, str]] = {}  # checked name -> (chained, query)
        self._grid: tuple[Stimulus, np.ndarray] | None = None

    def sweep(self, params: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
        """Trigger one sweep, wait for it and read ``params`` (see ``Analyzer.sweep``)."""
        names = self.check_params(params)
        points = self.applied().points
        data = np.empty((len(names), points), dtype=np.complex128)
        first = 0
        if self.talk.dialect.wait == "wai":
            self.sweep_pending = True
            self._read_trace(self._command_pair(names[0])[0], data[0])
            first = 1
        else:
            self.trigger()
        for index in range(first, len(names)):
            self._read_trace(self._command_pair(names[index])[1], data[index])
        return self._frequencies(points), data.T

    def trigger(self) -> None:
        """Start one sweep; with ``wait: opc`` also wait until it is complete."""
        d = self.talk.dialect
        if d.wait == "wai":
            assert d.wai is not None
            self.talk.write(f"{d.trigger.render()};{d.wai.render()}")
            self.sweep_pending = True
        else:
            self.talk.write(d.trigger.render())
            self.talk.wait_opc(d.trigger.text, self.sweep_timeout())

    def read_traces(self, params: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
        """Read ``params`` from the last sweep (after ``trigger``); same shapes as ``sweep``."""
        names = self.check_params(params)
        points = self.applied().points
        data = np.empty((len(names), points), dtype=np.complex128)
        for name, row in zip(names, data, strict=True):
            self._read_trace(self._command_pair(name)[1], row)
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

    def _command_pair(self, name: str) -> tuple[str, str]:
        """(trigger, ``*WAI`` and the query in one message; the query alone) for ``name``."""
        pair = self._commands.get(name)
        if pair is None:
            d = self.talk.dialect
            query = d.trace_query.render(trace=d.traces[name])
            chained = f"{d.trigger.render()};{d.wai.render()};{query}" if d.wai else query
            pair = self._commands[name] = (chained, query)
        return pair

    def sweep_timeout(self) -> float:
        return self.talk.transport.timeout_s + SWEEP_TIME_MARGIN * self.sweep_time_s

    def _read_trace(self, command: str, row: np.ndarray) -> None:
        """Send ``command`` and read its trace reply into ``row`` (complex128, n points)."""
        timeout = self.sweep_timeout() if self.sweep_pending else None
        self.sweep_pending = False
        fmt = self.formats.format
        if fmt is None:
            raise ReplyError(f"instrument {self.talk.resource}: not opened")
        transport, points = self.talk.transport, row.size
        count = points * VALUES_PER_POINT
        what = f"{points} points x {VALUES_PER_POINT} values of {fmt.encoding}"
        layout = self.talk.dialect.layout
        if fmt.encoding == "ascii":
            transport.write(command)
            text = transport.read_line(command, timeout)
            values = self._decode(lambda: decode_ascii(text, count, what), command)
            to_complex(values, layout, out=row)
            return
        size = count * VALUE_SIZE[fmt.encoding]
        in_place = self.formats.in_place
        if in_place:
            target = memoryview(row).cast("B")  # complex128 in memory order: receive in place
        else:
            if len(self._scratch) != size:
                self._scratch = bytearray(size)
            target = memoryview(self._scratch)
        transport.query_block(command, size, target, timeout, what)
        if in_place:
            flat = row.view(np.float64)
            if not surely_finite(flat):
                self._decode(lambda: check_finite(flat), command)
            return
        order = self.formats.order
        values = self._decode(
            lambda: decode_binary(target, fmt.encoding, order, count, what), command
        )
        to_complex(values, layout, out=row)

    def _decode(self, decode: Any, command: str) -> Any:
        try:
            return decode()
        except BlockError as exc:
            raise BlockError(f"instrument {self.talk.resource}: '{command}' {exc}") from None

    def _frequencies(self, points: int) -> np.ndarray:
        dialect = self.talk.dialect
        query = dialect.frequency_query
        applied = self.applied()
        if query is None:
            grid = self._grid
            if grid is None or grid[0] is not applied:
                grid = self._grid = (applied, applied.frequencies())
            return grid[1].copy()
        command = query.render()
        text = self.talk.query(command)
        values = self._decode(lambda: decode_ascii(text, points, f"{points} frequencies"), command)
        freq = values * dialect.frequency_scale
        if points > 1 and not np.all(np.diff(freq) > 0):
            raise ReplyError(
                f"instrument {self.talk.resource}: '{command}' frequencies are not strictly "
                "increasing"
            )
        return freq
