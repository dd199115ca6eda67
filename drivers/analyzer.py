"""The analyzer adapter: one instrument, driven through its dialect.

    with Analyzer("TCPIP::127.0.0.1::5025::SOCKET", load_dialect("scpi-generic")) as an:
        an.identity                          # Identity(maker, model, serial, firmware)
        applied = an.configure(stimulus)     # set, read back, check the error queue
        freq_hz, data = an.sweep(["S11"])    # (n,) float64, (n, 1) complex128

Opening follows the usual driver habits for IEEE 488.2 instruments: clear input, clear
status (``*CLS``), read the identity, send the dialect's opening commands, choose the data
format and byte order and read them back, drain the error queue. Values only enter
commands as numbers formatted here, or as tokens from the validated dialect.
"""

from __future__ import annotations

import logging
import re
import sys
import threading
import time
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from drivers.blocks import (
    VALUE_SIZE,
    check_finite,
    decode_ascii,
    decode_binary,
    quote,
    surely_finite,
)
from drivers.deadline import Deadline
from drivers.dialect import STANDARDS, DataFormat, Dialect, SettingSpec
from drivers.errors import (
    BlockError,
    ConnectError,
    ConnectionLost,
    DialectError,
    ReplyError,
    ScpiErrorQueue,
    SettingMismatch,
    StimulusError,
)
from drivers.layouts import VALUES_PER_POINT, to_complex
from drivers.replies import (
    Identity,
    format_entries,
    parse_error_entry,
    parse_flag,
    parse_identity,
    parse_number,
    same_token,
)
from drivers.stimulus import S_PARAMETERS, Stimulus
from drivers.templates import format_number
from drivers.transport import SerialSettings, Transport

log = logging.getLogger(__name__)

__all__ = ["Analyzer", "Identity"]

FORMAT_ALIASES = {
    "ascii": "ascii",
    "asc": "ascii",
    "real32": "real32",
    "real,32": "real32",
    "real64": "real64",
    "real,64": "real64",
    "real": "real64",
}
REFUSAL_RETRY_S = 0.05  # pause before trying again when the instrument is still busy
SWEEP_TIME_MARGIN = 2.0  # wait up to twice the reported sweep time on top of the I/O timeout
_NATIVE = sys.byteorder  # "little" on every platform we run on


class Analyzer:
    """A vector network analyzer behind a VISA resource; constructing does no I/O."""

    def __init__(
        self,
        resource: str,
        dialect: Dialect,
        *,
        timeout_s: float = 5.0,
        connect_timeout_s: float = 5.0,
        data_format: str | None = None,
        byte_order: str | None = None,
        serial: SerialSettings | Mapping[str, Any] | None = None,
    ) -> None:
        self.dialect = dialect
        self.transport = Transport(
            resource,
            write_termination=dialect.write_termination,
            read_termination=dialect.read_termination,
            timeout_s=timeout_s,
            connect_timeout_s=connect_timeout_s,
            serial=serial,
        )
        self.resource = resource
        self._want_format = self._check_format(data_format)
        self._want_order = self._check_order(byte_order)
        self._lock = threading.RLock()
        self._identity: Identity | None = None
        self._format: DataFormat | None = None
        self._order = "little"
        self._applied: Stimulus | None = None
        self._sweep_time_s = 0.0
        self._sweep_pending = False
        self._scratch = bytearray()
        self._in_place = False
        self._commands: dict[str, tuple[str, str]] = {}  # checked name -> (chained, query)
        self._grid: tuple[Stimulus, np.ndarray] | None = None

    # -- lifetime ------------------------------------------------------------------
    def open(self) -> Analyzer:
        """Connect, clear, identify, run the opening sequence, choose the data format."""
        with self._lock:
            if self.transport.is_open:
                return self
            deadline = Deadline(self.transport.connect_timeout_s)
            while True:
                self.transport.open()
                try:
                    self._start_session()
                    return self
                except (_Refused, ConnectError, ConnectionLost) as refusal:
                    # A busy instrument says so (an error entry) and hangs up: try again
                    # until the connect timeout, it may be finishing with another client.
                    self.transport.close()
                    if deadline.expired():
                        if isinstance(refusal, _Refused):
                            raise ConnectError(
                                f"instrument {self.resource}: refused the connection: {refusal}"
                            ) from None
                        raise
                    time.sleep(REFUSAL_RETRY_S)
                except BaseException:
                    self.transport.close()
                    raise

    def close(self) -> None:
        with self._lock:
            self.transport.close()
            self._sweep_pending = False

    def reconnect(self) -> None:
        """Close and open again (after a dropped link or a timeout)."""
        with self._lock:
            self.close()
            self.open()

    def __enter__(self) -> Analyzer:
        return self.open()

    def __exit__(self, *exc: object) -> None:
        self.close()

    @property
    def identity(self) -> Identity:
        if self._identity is None:
            raise ReplyError(f"instrument {self.resource}: identity unknown (not opened yet)")
        return self._identity

    @property
    def data_format(self) -> str:
        """The encoding in use (``ascii``, ``real32``, ``real64``) once open."""
        return self._format.encoding if self._format else (self._want_format or "")

    @property
    def byte_order(self) -> str:
        return self._order

    @property
    def applied(self) -> Stimulus | None:
        """The settings read back by the last ``configure`` (or ``read_settings``)."""
        return self._applied

    def _start_session(self) -> None:
        d, t = self.dialect, self.transport
        unasked = t.clear_input()
        try:
            if d.clear is not None:
                t.write(d.clear.render())
            reply = self._query(d.identity.render())
        except ConnectionLost:
            if unasked:  # it said something unasked and hung up: a refusal
                raise _Refused(quote(unasked, 80)) from None
            raise
        if _REFUSAL.match(reply):  # e.g. '-300,"Device busy"': it serves another client
            raise _Refused(quote(reply.encode("ascii", "replace"), 80))
        self._identity = parse_identity(reply, self._where(d.identity.text))
        for command in d.opening:
            t.write(command.render())
        self._choose_format()
        self.check_errors("after opening")

    # -- data format ---------------------------------------------------------------
    def _check_format(self, data_format: str | None) -> str | None:
        if data_format is None:
            return None
        encoding = FORMAT_ALIASES.get(str(data_format).strip().lower())
        if encoding is None:
            raise DialectError(
                f"{self.dialect.source}: data format must be one of ascii, real32, real64, "
                f"got {data_format!r}"
            )
        self.dialect.data_format(encoding)  # DialectError when the dialect lacks it
        return encoding

    def _check_order(self, byte_order: str | None) -> str | None:
        if byte_order is None:
            return None
        order = str(byte_order).strip().lower()
        if order not in ("big", "little"):
            raise DialectError(
                f"{self.dialect.source}: byte order must be big or little, got {byte_order!r}"
            )
        orders = self.dialect.byte_orders
        if orders is None:
            raise DialectError(
                f"{self.dialect.source}: has no binary formats, so no byte order to choose"
            )
        if orders.fixed and order != orders.preferred:
            raise DialectError(
                f"{self.dialect.source}: data.byte_order is fixed to {orders.preferred}, "
                f"got {order!r}"
            )
        return order

    def _choose_format(self) -> None:
        d = self.dialect
        candidates = [d.data_format(self._want_format)] if self._want_format else list(d.formats)
        refusals = []
        for fmt in candidates:
            reason = self._try_format(fmt)
            if reason is None:
                self._format = fmt
                # REAL,64 re/im pairs in the host's byte order are complex128 already.
                self._in_place = (
                    fmt.encoding == "real64"
                    and self.dialect.layout == "re_im"
                    and self._order == _NATIVE
                )
                return
            refusals.append(f"{fmt.encoding}: {reason}")
        raise SettingMismatch(
            f"instrument {self.resource}: refused every data format tried ({'; '.join(refusals)})"
        )

    def _try_format(self, fmt: DataFormat) -> str | None:
        """Select ``fmt`` (and a byte order); ``None`` when accepted, else why not."""
        d = self.dialect
        if fmt.set is not None:
            reason = self._select(fmt.set.render(), d.format_query, fmt.reply)
            if reason:
                return reason
        if not fmt.binary:
            return None
        orders = d.byte_orders
        assert orders is not None  # the dialect loader requires it with binary formats
        if orders.fixed:
            self._order = orders.preferred
            return None
        wanted = [self._want_order] if self._want_order else [orders.preferred]
        if not self._want_order:
            wanted.append("big" if orders.preferred == "little" else "little")
        reasons = []
        for order in wanted:
            command, reply = orders.command(order)
            assert command is not None
            reason = self._select(command.render(), orders.query, reply)
            if reason is None:
                self._order = order
                return None
            reasons.append(f"byte order {order}: {reason}")
        return ", ".join(reasons)

    def _select(self, command: str, query: Any, reply: str | None) -> str | None:
        self.transport.write(command)
        if self.dialect.opc_after_setting:
            self._wait_opc(command)
        problem = None
        if query is not None and reply is not None:
            text = self._query(query.render())
            if not same_token(text, reply):
                problem = f"'{query.text}' read back {text.strip()!r} after '{command}'"
        entries = self.error_queue()
        if entries:
            problem = f"'{command}' raised {format_entries(entries)}"
        return problem

    # -- settings --------------------------------------------------------------------
    def configure(self, stimulus: Stimulus) -> Stimulus:
        """Send the stimulus, read every setting back and check the error queue.

        Returns the settings as read back. A read-back outside the dialect's tolerance is
        ``SettingMismatch`` naming the setting, the value sent and the value read;
        entries in the error queue are ``ScpiErrorQueue``.
        """
        with self._lock:
            wanted = self._wanted_values(stimulus)
            # Every command is built (and every value checked) before anything is sent.
            commands = {n: self._setting_commands(n, v) for n, v in wanted.items()}
            order = self._setting_order(stimulus)
            for name in order:
                for command in commands[name]:
                    self.transport.write(command)
                    if self.dialect.opc_after_setting:
                        self._wait_opc(command)
            sent = {name: ";".join(commands[name]) for name in order}
            self.check_errors("after sending the settings " + ", ".join(order))
            applied = self._read_back()
            for name in order:
                spec = self.dialect.settings[name]
                got = applied[name]
                if not spec.matches(wanted[name], got):
                    raise SettingMismatch(
                        f"instrument {self.resource}: setting {name}: sent {wanted[name]:.12g} "
                        f"{_UNITS[name]} ('{sent[name]}'), read back {got:.12g} {_UNITS[name]} "
                        f"('{spec.query.text}')"
                    )
            self._check_averaging_state(stimulus.averaging)
            self.check_errors("after reading the settings back")
            self._applied = self._stimulus_from(applied)
            self._sweep_time_s = self._read_sweep_time()
            return self._applied

    def settings_match(self, stimulus: Stimulus) -> bool:
        """True when the instrument still holds ``stimulus`` (e.g. it did not reboot)."""
        with self._lock:
            wanted = self._wanted_values(stimulus)
            applied = self._read_back()
            return all(self.dialect.settings[n].matches(wanted[n], applied[n]) for n in applied)

    def read_settings(self) -> Stimulus:
        """The instrument's current stimulus, read back without setting anything."""
        with self._lock:
            self._applied = self._stimulus_from(self._read_back())
            return self._applied

    def _wanted_values(self, stimulus: Stimulus) -> dict[str, float]:
        values = {
            "start": stimulus.start_hz,
            "stop": stimulus.stop_hz,
            "points": stimulus.points,
            "power": stimulus.power_dbm,
            "if_bandwidth": stimulus.if_bandwidth_hz,
            "averaging": stimulus.averaging,
        }
        if "averaging" not in self.dialect.settings:
            if stimulus.averaging != 1:
                raise DialectError(
                    f"{self.dialect.source}: settings has no averaging entry, so averaging "
                    f"{stimulus.averaging} cannot be set (only 1)"
                )
            del values["averaging"]
        return values

    def _setting_order(self, stimulus: Stimulus) -> list[str]:
        """Start before stop, unless the new start lies above the present stop."""
        names = [
            n
            for n in ("start", "stop", "points", "if_bandwidth", "power", "averaging")
            if n in self.dialect.settings
        ]
        current_stop = self._read_setting(self.dialect.settings["stop"])
        if stimulus.start_hz > current_stop:
            names[0], names[1] = "stop", "start"
        return names

    def _setting_commands(self, name: str, value: float) -> list[str]:
        """The commands that set ``name`` to ``value`` (SI units)."""
        spec = self.dialect.settings[name]
        try:
            number = format_number(
                value if spec.integer else value / spec.scale, integer=spec.integer
            )
        except ValueError as exc:
            raise StimulusError(f"instrument {self.resource}: setting {name}: {exc}") from None
        state = spec.state_on if value > 1 else spec.state_off
        return [t.render(value=number, state=state or "") for t in spec.set]

    def _read_back(self) -> dict[str, float]:
        return {name: self._read_setting(spec) for name, spec in self.dialect.settings.items()}

    def _read_setting(self, spec: SettingSpec) -> float:
        command = spec.query.render()
        value = parse_number(self._query(command), self._where(command), integer=spec.integer)
        return value if spec.integer else value * spec.scale

    def _check_averaging_state(self, averaging: int) -> None:
        spec = self.dialect.settings.get("averaging")
        if spec is None or spec.state_query is None:
            return
        command = spec.state_query.render()
        state = parse_flag(self._query(command), self._where(command))
        if state != (averaging > 1):
            raise SettingMismatch(
                f"instrument {self.resource}: setting averaging: sent state "
                f"{'on' if averaging > 1 else 'off'}, '{command}' reads {'on' if state else 'off'}"
            )

    def _stimulus_from(self, values: Mapping[str, float]) -> Stimulus:
        try:
            return Stimulus(
                start_hz=values["start"],
                stop_hz=values["stop"],
                points=int(values["points"]),
                power_dbm=values["power"],
                if_bandwidth_hz=values["if_bandwidth"],
                averaging=int(values.get("averaging", 1)),
            )
        except ValueError as exc:
            raise ReplyError(
                f"instrument {self.resource}: settings read back are not a sweep: {exc}"
            ) from None

    def _read_sweep_time(self) -> float:
        query = self.dialect.sweep_time_query
        if query is None:
            return 0.0
        seconds = parse_number(self._query(query.render()), self._where(query.text))
        return max(0.0, seconds)

    # -- sweeps ----------------------------------------------------------------------
    def sweep(self, params: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
        """Trigger one sweep, wait for it and read ``params``.

        Returns ``(freq_hz, data)``: (n,) float64 and (n, len(params)) complex128, one
        column per parameter in the order asked (column-major: each trace is received in
        place). With ``wait: wai`` the trigger, ``*WAI`` and the first trace query travel in
        one message: one round trip for a 1-port sweep. The error queue is not read here;
        call ``error_queue`` or ``check_errors`` at the cadence you need.
        """
        with self._lock:
            names = self._check_params(params)
            points = self._points()
            data = np.empty((len(names), points), dtype=np.complex128)
            first = 0
            if self.dialect.wait == "wai":
                self._sweep_pending = True
                self._read_trace(self._chained_command(names[0]), data[0])
                first = 1
            else:
                self.trigger()
            for index in range(first, len(names)):
                self._read_trace(self._trace_command(names[index]), data[index])
            return self._frequencies(points), data.T

    def trigger(self) -> None:
        """Start one sweep; with ``wait: opc`` also wait until it is complete."""
        with self._lock:
            d = self.dialect
            if d.wait == "wai":
                assert d.wai is not None
                self.transport.write(f"{d.trigger.render()};{d.wai.render()}")
                self._sweep_pending = True
            else:
                self.transport.write(d.trigger.render())
                self._wait_opc(d.trigger.text, self._sweep_timeout())

    def read_traces(self, params: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
        """Read ``params`` from the last sweep (after ``trigger``); same shapes as ``sweep``."""
        with self._lock:
            names = self._check_params(params)
            points = self._points()
            data = np.empty((len(names), points), dtype=np.complex128)
            for name, row in zip(names, data, strict=True):
                self._read_trace(self._trace_command(name), row)
            return self._frequencies(points), data.T

    def _check_params(self, params: Sequence[str]) -> list[str]:
        if isinstance(params, str):
            params = [params]
        names = list(params)
        if len(names) == 1 and names[0] in self._commands:
            return names  # the common case, already checked once
        if not names:
            raise DialectError(f"{self.dialect.source}: no S-parameters asked for")
        for name in names:
            if name not in S_PARAMETERS:
                raise DialectError(
                    f"not an S-parameter: {name!r}; known: {', '.join(S_PARAMETERS)}"
                )
            if name not in self.dialect.traces:
                raise DialectError(
                    f"{self.dialect.source}: data.traces has no token for {name} "
                    f"(has {', '.join(self.dialect.traces)})"
                )
        if len(set(names)) != len(names):
            raise DialectError(f"S-parameters asked for twice: {', '.join(names)}")
        return names

    def _trace_command(self, name: str) -> str:
        return self._command_pair(name)[1]

    def _chained_command(self, name: str) -> str:
        """Trigger, ``*WAI`` and the first trace query in one message."""
        return self._command_pair(name)[0]

    def _command_pair(self, name: str) -> tuple[str, str]:
        pair = self._commands.get(name)
        if pair is None:
            d = self.dialect
            query = d.trace_query.render(trace=d.traces[name])
            chained = f"{d.trigger.render()};{d.wai.render()};{query}" if d.wai else query
            pair = self._commands[name] = (chained, query)
        return pair

    def _points(self) -> int:
        if self._applied is None:
            self.read_settings()
        assert self._applied is not None
        return self._applied.points

    def _sweep_timeout(self) -> float:
        return self.transport.timeout_s + SWEEP_TIME_MARGIN * self._sweep_time_s

    def _read_trace(self, command: str, row: np.ndarray) -> None:
        """Send ``command`` and read its trace reply into ``row`` (complex128, n points)."""
        timeout = self._sweep_timeout() if self._sweep_pending else None
        self._sweep_pending = False
        fmt = self._format
        if fmt is None:
            raise ReplyError(f"instrument {self.resource}: not opened")
        transport, points = self.transport, row.size
        count = points * VALUES_PER_POINT
        what = f"{points} points x {VALUES_PER_POINT} values of {fmt.encoding}"
        layout = self.dialect.layout
        if fmt.encoding == "ascii":
            transport.write(command)
            text = transport.read_line(command, timeout)
            values = self._decode(lambda: decode_ascii(text, count, what), command)
            to_complex(values, layout, out=row)
            return
        size = count * VALUE_SIZE[fmt.encoding]
        in_place = self._in_place
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
        values = self._decode(
            lambda: decode_binary(target, fmt.encoding, self._order, count, what), command
        )
        to_complex(values, layout, out=row)

    def _decode(self, decode: Any, command: str) -> Any:
        try:
            return decode()
        except BlockError as exc:
            raise BlockError(f"instrument {self.resource}: '{command}' {exc}") from None

    def _frequencies(self, points: int) -> np.ndarray:
        query = self.dialect.frequency_query
        applied = self._applied
        assert applied is not None
        if query is None:
            grid = self._grid
            if grid is None or grid[0] is not applied:
                grid = self._grid = (applied, applied.frequencies())
            return grid[1].copy()
        command = query.render()
        text = self._query(command)
        values = self._decode(lambda: decode_ascii(text, points, f"{points} frequencies"), command)
        freq = values * self.dialect.frequency_scale
        if points > 1 and not np.all(np.diff(freq) > 0):
            raise ReplyError(
                f"instrument {self.resource}: '{command}' frequencies are not strictly increasing"
            )
        return freq

    # -- errors, standards, helpers --------------------------------------------------
    def error_queue(self) -> list[tuple[int, str]]:
        """Drain the error queue, oldest first (at most the dialect's ``max_entries`` reads)."""
        with self._lock:
            d = self.dialect
            command = d.error_query.render()
            entries: list[tuple[int, str]] = []
            for _ in range(d.error_max_entries):
                code, text = parse_error_entry(self._query(command), self._where(command))
                if code == d.error_none_code:
                    return entries
                entries.append((code, text))
            log.warning(
                "%s: error queue still not empty after %d reads", self.resource, len(entries)
            )
            return entries

    def check_errors(self, context: str) -> None:
        """Drain the error queue; entries raise ``ScpiErrorQueue`` naming ``context``."""
        entries = self.error_queue()
        if entries:
            raise ScpiErrorQueue(
                f"instrument {self.resource}: error queue {context}: {format_entries(entries)}",
                tuple(entries),
            )

    def select_standard(self, name: str) -> None:
        """Switch the automatic standard switch to open, short, load, thru or device."""
        with self._lock:
            switch = self.dialect.switch
            if switch is None:
                raise DialectError(
                    f"{self.dialect.source}: has no standard switch (no 'switch' section); "
                    f"connect the {name} by hand"
                )
            if name not in STANDARDS:
                raise DialectError(f"not a standard: {name!r}; known: {', '.join(STANDARDS)}")
            token = switch.tokens.get(name)
            if token is None:
                raise DialectError(
                    f"{self.dialect.source}: switch.standards has no token for {name} "
                    f"(has {', '.join(switch.tokens)})"
                )
            command = switch.set.render(standard=token)
            self.transport.write(command)
            if self.dialect.opc_after_setting:
                self._wait_opc(command)
            if switch.query is not None:
                query = switch.query.render(standard=token)
                reply = self._query(query)
                ok = (
                    parse_flag(reply, self._where(query))
                    if switch.reply == "flag"
                    else same_token(reply, token)
                )
                if not ok:
                    raise SettingMismatch(
                        f"instrument {self.resource}: standard {name}: sent '{command}', "
                        f"'{query}' replied {quote(reply.encode())}"
                    )
            self.check_errors(f"after selecting the {name} standard")

    def _wait_opc(self, after: str, timeout_s: float | None = None) -> None:
        command = self.dialect.opc_query.render()
        reply = self._query(command, timeout_s)
        if reply.strip().lstrip("+") != "1":
            raise ReplyError(
                f"instrument {self.resource}: '{command}' after '{after}' replied "
                f"{quote(reply.encode())}, expected 1"
            )

    def _query(self, command: str, timeout_s: float | None = None) -> str:
        self.transport.write(command)
        return self.transport.read_line(command, timeout_s)

    def _where(self, command: str) -> str:
        return f"instrument {self.resource}: '{command}'"


class _Refused(Exception):
    """The instrument answered the identity query with an error entry: it is busy."""


_REFUSAL = re.compile(r'^\s*-\d+\s*,\s*"')
_UNITS = {
    "start": "Hz",
    "stop": "Hz",
    "points": "points",
    "power": "dBm",
    "if_bandwidth": "Hz",
    "averaging": "sweeps",
}
