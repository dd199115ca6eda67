"""Walk every command of a dialect on a live instrument, leaving nothing changed.

Order (safe first): identity; the error queue as found (drained and shown); every query
(settings, data format, byte order, sweep time, switch); then each setting is sent back
the very value it read and read again; each data format and byte order is selected, read
back, and the one found is restored; one sweep is taken at the present settings and each
trace (and the frequency axis) is read in ASCII; the switch is set to the standard it
already had; finally the status is cleared. The switch terms (``data.switch_terms``) are
read from the same sweep as the traces. After every command the error queue is
drained, so each step shows exactly what the instrument said about that line of the file.
Opening commands are listed but not sent: the dialect has no query to restore what they
change (they run each time sweepd opens the instrument).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any

from drivers.conversation import Conversation
from drivers.dialect import Dialect, SettingSpec
from drivers.errors import BlockError, InstrumentTimeout, ReplyError
from drivers.replies import parse_error_entry, parse_flag, parse_number, parse_quantity
from drivers.templates import format_number
from drivers.trace_reader import trace_tokens, wait_by_polling
from drivers.transport import Transport

VALUE_SIZE = {"real32": 4, "real64": 8}


@dataclass
class Step:
    """One command sent: which key of the file, what went, what came back."""

    key: str
    sent: str | None
    reply: str | None = None
    errors: list[tuple[int, str]] = field(default_factory=list)
    ok: bool = True
    note: str = ""

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


class Walker:
    """Runs the walk on an open transport; ``steps`` is the record."""

    def __init__(self, transport: Transport, dialect: Dialect) -> None:
        self.t = transport
        self.d = dialect
        self.talk = Conversation(transport, dialect, transport.resource)
        self.steps: list[Step] = []
        self.read: dict[str, str] = {}  # key -> first reply

    # -- primitives ------------------------------------------------------------------
    def ask(self, key: str, command: str) -> str | None:
        try:
            reply: str | None = self.talk.query(command).strip()
        except (InstrumentTimeout, ReplyError, BlockError) as exc:
            reply = None
            note = str(exc).split(": ", 1)[-1]
        step = Step(key, command, reply)
        if reply is None:
            step.ok, step.note = False, note
        self._finish(step)
        if step.ok and key not in self.read:
            self.read[key] = reply or ""
        return reply if step.ok else None

    def send(self, key: str, command: str, note: str = "") -> bool:
        self.talk.write(command)
        step = Step(key, command, note=note)
        self._finish(step)
        return step.ok

    def _finish(self, step: Step) -> None:
        step.errors = self.drain()
        if step.errors:
            step.ok = False
        self.steps.append(step)

    def drain(self) -> list[tuple[int, str]]:
        entries: list[tuple[int, str]] = []
        for _ in range(self.d.error_max_entries):
            try:
                code, text = parse_error_entry(self.talk.query(self.d.error_query.text),
                                               self.d.error_query.text)
            except (InstrumentTimeout, ReplyError, BlockError):
                break
            if code == self.d.error_none_code:
                break
            entries.append((code, text))
        return entries

    # -- the walk --------------------------------------------------------------------
    def run(self) -> list[Step]:
        self.t.clear_input()
        self.ask("session.identity", self.d.identity.text)
        found = self.drain()
        self.steps.append(Step("errors.query", self.d.error_query.text,
                               "; ".join(f"{c},{t!r}" for c, t in found) or "empty",
                               note="the error queue as found, drained"))
        self._queries()
        for name, spec in self.d.settings.items():
            if spec.fixed is None:  # a fixed setting has no commands to walk
                self._restore_setting(name, spec)
        self._formats()
        self._sweep()
        self._switch()
        if self.d.clear is not None:
            self.send("session.clear", self.d.clear.text)
        for index, command in enumerate(self.d.opening):
            self.steps.append(Step(f"session.opening[{index}]", None, note=(
                f"'{command.text}' changes state the dialect cannot read back")))
        return self.steps

    def _queries(self) -> None:
        for name, spec in self.d.settings.items():
            if spec.query is None:
                continue  # fixed by the dialect: nothing to ask
            self.ask(f"settings.{name}.query", spec.query.text)
            if spec.state_query is not None:
                self.ask(f"settings.{name}.state.query", spec.state_query.text)
        if self.d.format_query is not None:
            self.ask("data.format_query", self.d.format_query.text)
        orders = self.d.byte_orders
        if orders is not None and orders.query is not None:
            self.ask("data.byte_order.query", orders.query.text)
        if self.d.sweep_time_query is not None:
            self.ask("trigger.sweep_time_query", self.d.sweep_time_query.text)
        switch = self.d.switch
        if switch is not None and switch.query is not None:
            if "standard" in switch.query.fields:
                for name, token in switch.tokens.items():
                    self.ask(f"switch.query[{name}]", switch.query.render(standard=token))
            else:
                self.ask("switch.query", switch.query.text)

    def _restore_setting(self, name: str, spec: SettingSpec) -> None:
        key = f"settings.{name}"
        before = self.read.get(f"{key}.query")
        if before is None:
            self.steps.append(Step(f"{key}.set", None, ok=False,
                                   note="its query gave no value to restore"))
            return
        try:
            value = self._instrument_units(before, spec)
            values = {"value": format_number(round(value) if spec.integer else value,
                                             spec.integer)}
        except (ValueError, ReplyError):
            self.steps.append(Step(f"{key}.set", None, ok=False,
                                   note=f"the query's reply {before!r} is no number"))
            return
        if spec.state_query is not None:
            state = self.read.get(f"{key}.state.query", "")
            try:
                values["state"] = spec.state_on if parse_flag(state, key) else spec.state_off
            except ReplyError:
                values["state"] = spec.state_on if value > 1 else spec.state_off
        for index, template in enumerate(spec.set):
            suffix = f"[{index}]" if len(spec.set) > 1 else ""
            self.send(f"{key}.set{suffix}", template.render(**values),
                      note="the value it read, sent back")
        if self.d.opc_after_setting:
            self.ask("session.opc_query", self.d.opc_query.text)
        self._expect_same(f"{key}.query", spec.query.text, before, spec)

    def _expect_same(self, key: str, command: str, before: str,
                     spec: SettingSpec | None = None) -> None:
        after = self.ask(f"{key} (again)", command)
        if after is None or _same(before, after, spec):
            return
        step = self.steps[-1]
        step.ok, step.note = False, f"read {before!r} before, {after!r} after"

    def _formats(self) -> None:
        d = self.d
        before = self.read.get("data.format_query")
        for fmt in d.formats:
            if fmt.set is None:
                continue
            self.send(f"data.formats[{fmt.encoding}].set", fmt.set.text)
            if d.format_query is not None and fmt.reply is not None:
                got = self.ask(f"data.formats[{fmt.encoding}].reply", d.format_query.text)
                if got is not None and got.upper() != fmt.reply.upper():
                    step = self.steps[-1]
                    step.ok, step.note = False, f"expected {fmt.reply!r} (data.formats reply)"
        self._restore_format(before)
        orders = d.byte_orders
        if orders is None or orders.fixed or orders.query is None:
            return
        order_before = self.read.get("data.byte_order.query")
        for order in ("big", "little"):
            command, reply = orders.command(order)
            if command is None:
                continue
            self.send(f"data.byte_order.{order}.set", command.text)
            got = self.ask(f"data.byte_order.{order}.reply", orders.query.text)
            if got is not None and reply is not None and got.upper() != reply.upper():
                step = self.steps[-1]
                step.ok, step.note = False, f"expected {reply!r}"
        for order in ("big", "little"):
            command, reply = orders.command(order)
            if command is not None and reply and order_before and \
                    order_before.upper() == reply.upper():
                self.send("data.byte_order (restore)", command.text, note="as found")

    def _restore_format(self, before: str | None) -> None:
        for fmt in self.d.formats:
            if fmt.set is not None and fmt.reply and before and before.upper() == \
                    fmt.reply.upper():
                self.send("data.formats (restore)", fmt.set.text, note="as found")

    def _sweep(self) -> None:
        d = self.d
        ascii_fmt = next((f for f in d.formats if f.encoding == "ascii"), None)
        if ascii_fmt is None:
            self.steps.append(Step("data.trace_query", None, note=(
                "traces are read in ASCII here and the dialect offers none")))
            return
        points = self._points()
        if ascii_fmt.set is not None:
            self.send("data.formats[ascii].set", ascii_fmt.set.text, note="to read traces")
        self._define("define", "defined for this check")
        self.send("trigger.command", d.trigger.text, note="one sweep at the present settings")
        self._wait()
        for name in (*d.traces, *d.switch_terms):
            tokens = trace_tokens(d, name)
            if d.measurement is not None:
                for template in d.measurement.select:
                    self.send(f"measurement.select[{name}]", template.render(**tokens))
            self._count(reading_key(name), d.trace_query.render(**tokens),
                        None if points is None else 2 * points)
        self._axis(points)
        self._define("cleanup", "removed again")
        if ascii_fmt.set is not None:
            self._restore_format(self.read.get("data.format_query"))

    def _points(self) -> int | None:
        """The point count read at the start (None: counts are shown, not checked)."""
        spec = self.d.settings.get("points")
        try:
            return round(self._instrument_units(self.read.get("settings.points.query", ""),
                                                spec))
        except (ValueError, ReplyError):
            return None

    def _instrument_units(self, reply: str, spec: SettingSpec | None) -> float:
        """A setting's reply as the number its set template takes."""
        integer = bool(spec and spec.integer)
        if self.d.quirks.unit_suffixes:
            value, in_si = parse_quantity(reply, "reply", integer=integer)
            return value / (spec.scale if spec else 1.0) if in_si and not integer else value
        return parse_number(reply, "reply", integer=integer)

    def _define(self, part: str, note: str) -> None:
        spec = self.d.measurement
        if spec is None:
            return
        for name in (*self.d.traces, *self.d.switch_terms):
            for template in getattr(spec, part):
                self.send(f"measurement.{part}[{name}]",
                          template.render(**trace_tokens(self.d, name)), note=note)

    def _wait(self) -> None:
        d = self.d
        if d.wait != "poll" or d.poll is None:
            self.ask("session.opc_query", d.opc_query.text)
            return
        step = Step("trigger.poll.query", d.poll.query.text, note="asked until done")
        try:
            wait_by_polling(self.talk, self.t.timeout_s * 10, 0.0)
            step.reply = d.poll.done_reply or f"bit {d.poll.done_bit} set"
        except (InstrumentTimeout, ReplyError, BlockError) as exc:
            step.ok, step.note = False, str(exc).split(": ", 1)[-1]
        self._finish(step)

    def _axis(self, points: int | None) -> None:
        axis = self.d.frequency
        if axis is None:
            return
        if axis.kind == "edges":
            for key, template in (("start", axis.start), ("stop", axis.stop),
                                  ("points", axis.points)):
                if template is not None:
                    self.ask(f"data.frequency.{key}", template.text)
            return
        assert axis.query is not None
        if axis.encoding == "ascii":
            self._count("data.frequency.query", axis.query.text, points)
            return
        step = Step("data.frequency.query", axis.query.text)
        if points is None:
            step.ok, step.note = False, "not read: the point count is unknown"
            step.sent = None
        else:
            size = points * VALUE_SIZE[axis.encoding]
            try:
                self.talk.ask(axis.query.text)
                self.t.read_block(axis.query.text, size)
                step.reply = f"block of {size} bytes ({points} {axis.encoding} values)"
            except (InstrumentTimeout, ReplyError, BlockError) as exc:
                step.ok, step.note = False, str(exc).split(": ", 1)[-1]
        self._finish(step)

    def _count(self, key: str, command: str, want: int | None) -> None:
        reply = self.ask(key, command)
        if reply is None:
            return
        step = self.steps[-1]
        count = len([v for v in reply.split(",") if v.strip()])
        step.reply = f"{count} values: {reply[:60]}{'...' if len(reply) > 60 else ''}"
        if want is not None and count != want:
            step.ok, step.note = False, f"expected {want} values"

    def _switch(self) -> None:
        switch = self.d.switch
        if switch is None or switch.query is None:
            return
        current = None
        for name, token in switch.tokens.items():
            if switch.reply == "flag":
                got = self.read.get(f"switch.query[{name}]", "")
                if got.strip().lstrip("+") in ("1", "ON"):
                    current = token
            elif self.read.get("switch.query", "").strip().upper() == token.upper():
                current = token
        if current is None:
            self.steps.append(Step("switch.set", None, note=(
                "no standard was reported as connected")))
            return
        self.send("switch.set", switch.set.render(standard=current), note="the standard it had")


def reading_key(name: str) -> str:
    """The key of the file that gives a reading's token: ``data.traces.S21``, or
    ``data.switch_terms.forward`` for the switch term ``switch.forward``."""
    if name.startswith("switch."):
        return f"data.switch_terms.{name.split('.', 1)[1]}"
    return f"data.traces.{name}"


def _same(before: str, after: str, spec: SettingSpec | None) -> bool:
    if before.strip().upper() == after.strip().upper():
        return True
    try:
        a, b = float(before.split()[0]), float(after.split()[0])
    except (ValueError, IndexError):
        return False
    if spec is None:
        return a == b
    scale = spec.scale or 1.0
    return abs(a - b) * scale <= spec.absolute + spec.relative * abs(a * scale)


def walk(dialect: Dialect, resource: str, timeout_s: float) -> list[Step]:
    """Open ``resource`` with the dialect's terminators and walk every command."""
    transport = Transport(resource, write_termination=dialect.write_termination,
                          read_termination=dialect.read_termination, timeout_s=timeout_s,
                          connect_timeout_s=max(timeout_s, 2.0))
    transport.open()
    try:
        return Walker(transport, dialect).run()
    finally:
        transport.close()
