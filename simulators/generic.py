"""The ``generic`` personality: SCPI-1999 style commands (see DEVELOPERS.md, "The simulator").

``*IDN?`` → ``sweepd-sim,generic-2port,SIM0001,1.0``; replies end in LF. Frequency
coupling: STARt above STOP pushes STOP up (and the reverse); CENTer keeps the span and
SPAN keeps the centre, both clipped to 10 kHz..20 GHz. ``:ROUTe:CLOSe (@n)`` drives the
automatic standard switch: 1 open, 2 short, 3 load, 4 thru, 5 device. ``:TRACe:DATA?``
also serves the switch terms of the last sweep under trace names of our own, ``TERMF``
(a2/b2, port 1 driving) and ``TERMR`` (a1/b1, port 2 driving).
"""

from __future__ import annotations

from collections.abc import Callable

from simulators.common_cmds import add_common
from simulators.encoding import ascii_list, interleaved, real_block
from simulators.instrument import AnalyzerCore
from simulators.scpi_errors import ScpiError, format_entry
from simulators.scpi_params import FREQUENCY_UNITS, POWER_UNITS, format_number
from simulators.scpi_parser import Call, Reply
from simulators.scpi_tree import CommandTree

IDENTITY = "sweepd-sim,generic-2port,SIM0001,1.0"
TERMINATOR = b"\n"
F_MIN, F_MAX = 10e3, 20e9
# trace name -> raw S (row, col), or the switch term read with the sweep: TERMF = a2/b2
# (port 1 driving), TERMR = a1/b1 (port 2 driving); names of our own, not SCPI's
TRACES: dict[str, tuple[int, int] | int] = {"S11": (0, 0), "S21": (1, 0), "S12": (0, 1),
                                            "S22": (1, 1), "TERMF": 0, "TERMR": 1}
SWITCH = {1: "open", 2: "short", 3: "load", 4: "thru", 5: "device"}


def build(core: AnalyzerCore) -> CommandTree:
    """The command tree of this personality, bound to ``core``."""
    tree = CommandTree()
    add_common(tree, core)
    _add_frequency(tree, core)
    _add_sweep(tree, core)
    _add_trigger(tree, core)
    _add_format(tree, core)
    _add_trace(tree, core)
    _add_route(tree, core)
    _add_system(tree, core)
    return tree


def numeric(tree: CommandTree, core: AnalyzerCore, pattern: str, name: str, lo: float,
            hi: float, default: float, units: dict | None = None, integer: bool = False,
            apply: Callable[[float], None] | None = None) -> None:
    """A numeric setting: set (with units, MIN/MAX/DEF) and query (the value, or the
    limits asked with MIN/MAX/DEF)."""
    def set_(call: Call) -> None:
        value = call.one().number(lo, hi, default, units, integer)
        value = int(value) if integer else value
        if apply is None:
            core.change(**{name: value})
        else:
            apply(value)

    def query(call: Call) -> str:
        param = call.optional()
        if param is not None:
            if param.kind != "char":
                raise ScpiError(-224, f"{call.header} {param.text}; use MIN, MAX or DEF")
            return format_number(param.number(lo, hi, default, units, integer))
        return format_number(getattr(core.settings, name))  # *RST replaces the settings

    tree.add(pattern, set=set_, query=query)


def _add_frequency(tree: CommandTree, core: AnalyzerCore) -> None:
    s = lambda: core.settings  # noqa: E731  (settings object is replaced by *RST)

    def set_start(v: float) -> None:
        core.change(start_hz=v, stop_hz=max(v, s().stop_hz))

    def set_stop(v: float) -> None:
        core.change(stop_hz=v, start_hz=min(v, s().start_hz))

    def set_centered(center: float, span: float) -> None:
        half = max(0.0, min(span / 2.0, center - F_MIN, F_MAX - center))
        core.change(start_hz=center - half, stop_hz=center + half)

    numeric(tree, core, "[:SENSe#]:FREQuency:STARt", "start_hz", F_MIN, F_MAX, 10e6,
            FREQUENCY_UNITS, apply=set_start)
    numeric(tree, core, "[:SENSe#]:FREQuency:STOP", "stop_hz", F_MIN, F_MAX, 6e9,
            FREQUENCY_UNITS, apply=set_stop)

    def center_query(call: Call) -> str:
        call.none()
        return format_number((s().start_hz + s().stop_hz) / 2.0)

    def span_query(call: Call) -> str:
        call.none()
        return format_number(s().stop_hz - s().start_hz)

    def center_set(call: Call) -> None:
        c = call.one().number(F_MIN, F_MAX, (10e6 + 6e9) / 2, FREQUENCY_UNITS)
        set_centered(c, s().stop_hz - s().start_hz)

    def span_set(call: Call) -> None:
        span = call.one().number(0.0, F_MAX - F_MIN, 6e9 - 10e6, FREQUENCY_UNITS)
        set_centered((s().start_hz + s().stop_hz) / 2.0, span)

    tree.add("[:SENSe#]:FREQuency:CENTer", set=center_set, query=center_query)
    tree.add("[:SENSe#]:FREQuency:SPAN", set=span_set, query=span_query)


def _add_sweep(tree: CommandTree, core: AnalyzerCore) -> None:
    numeric(tree, core, "[:SENSe#]:SWEep:POINts", "points", 1, 200001, 201, integer=True)

    def sweep_time(call: Call) -> str:
        call.none()
        return format_number(core.sweep_time_s())

    tree.add("[:SENSe#]:SWEep:TIME", query=sweep_time)
    numeric(tree, core, "[:SENSe#]:BANDwidth|BWIDth[:RESolution]", "ifbw_hz", 1.0, 1e6, 1e3,
            FREQUENCY_UNITS)
    boolean(tree, core, "[:SENSe#]:AVERage[:STATe]", "avg_on")
    numeric(tree, core, "[:SENSe#]:AVERage:COUNt", "avg_count", 1, 1000, 1, integer=True)

    def aver_clear(call: Call) -> None:
        call.none()

    tree.add("[:SENSe#]:AVERage:CLEar", set=aver_clear)
    numeric(tree, core, ":SOURce#:POWer[:LEVel][:IMMediate][:AMPLitude]", "power_dbm",
            -90.0, 10.0, 0.0, POWER_UNITS)
    boolean(tree, core, ":OUTPut#[:STATe]", "output_on")


def _add_trigger(tree: CommandTree, core: AnalyzerCore) -> None:
    def init(call: Call) -> None:
        call.none()
        core.initiate(call.session.name)

    def abort(call: Call) -> None:
        call.none()
        core.abort()

    tree.add(":INITiate#[:IMMediate]", set=init)
    boolean(tree, core, ":INITiate#:CONTinuous", "continuous")
    tree.add(":ABORt", set=abort)

    def trig_set(call: Call) -> None:
        core.change(trigger_source=call.one().choice("IMMediate", "BUS", "EXTernal"))

    def trig_query(call: Call) -> str:
        call.none()
        return core.settings.trigger_source

    tree.add(":TRIGger#[:SEQuence]:SOURce", set=trig_set, query=trig_query)


def boolean(tree: CommandTree, core: AnalyzerCore, pattern: str, name: str) -> None:
    def set_(call: Call) -> None:
        core.change(**{name: call.one().boolean()})

    def query(call: Call) -> str:
        call.none()
        return "1" if getattr(core.settings, name) else "0"

    tree.add(pattern, set=set_, query=query)


def _add_format(tree: CommandTree, core: AnalyzerCore) -> None:
    def fmt_set(call: Call) -> None:
        if not call.params:
            raise ScpiError(-109, call.header)
        if len(call.params) > 2:
            raise ScpiError(-108, f"{call.header} {call.params[2].text}")
        kind = call.params[0].choice("ASCii", "REAL")
        width = core.settings.data_width if kind == "REAL" else 64
        if len(call.params) == 2:
            if kind == "ASC":
                raise ScpiError(-108, f"{call.header} {call.params[1].text}; ASCii takes no length")
            width = int(call.params[1].number(0, 1e6, 64, integer=True))
            if width not in (32, 64):
                raise ScpiError(-224, f"{call.header} {call.params[1].text}; use 32 or 64")
        elif kind == "REAL":
            width = 64
        core.change(data_format=kind, data_width=width)

    def fmt_query(call: Call) -> str:
        call.none()
        st = core.settings
        return "ASC" if st.data_format == "ASC" else f"REAL,{st.data_width}"

    def border_set(call: Call) -> None:
        core.change(byte_order=call.one().choice("NORMal", "SWAPped"))

    def border_query(call: Call) -> str:
        call.none()
        return core.settings.byte_order

    tree.add(":FORMat[:DATA]", set=fmt_set, query=fmt_query)
    tree.add(":FORMat:BORDer", set=border_set, query=border_query)


def _add_trace(tree: CommandTree, core: AnalyzerCore) -> None:
    def trace(call: Call) -> Reply:
        name = call.one().choice(*TRACES)
        data = core.trace(call.session.name)
        st = core.settings
        short = core.faults.take("data", call.session.name, ("wrong_count",), data.index)
        key = (name, st.data_format, st.data_width, st.byte_order, short is not None)
        payload = data.replies.get(key)
        if payload is None:
            values = core.values(data, TRACES[name])
            if short is not None:
                values = values[:-1]
            numbers = interleaved(values)
            if st.data_format == "ASC":
                payload = ascii_list(numbers)
            else:
                payload = real_block(numbers, st.data_width, st.byte_order == "NORM")
            if short is None:
                data.replies[key] = payload
        return Reply(payload, data=True)

    tree.add(":TRACe[:DATA]", query=trace)


def _add_route(tree: CommandTree, core: AnalyzerCore) -> None:
    def close(call: Call) -> None:
        channels = call.one().channels(1, 5)
        if len(set(channels)) != 1:
            raise ScpiError(-221, f"{call.header}; the switch closes one path at a time")
        core.bench.connect(SWITCH[channels[0]])

    def close_query(call: Call) -> str:
        channels = call.one().channels(1, 5)
        now = core.bench.connected
        return ",".join("1" if SWITCH[c] == now else "0" for c in channels)

    tree.add(":ROUTe#:CLOSe", set=close, query=close_query)


def _add_system(tree: CommandTree, core: AnalyzerCore) -> None:
    def err_next(call: Call) -> str:
        call.none()
        return format_entry(core.status.pop())

    def err_count(call: Call) -> str:
        call.none()
        return str(core.status.count())

    def version(call: Call) -> str:
        call.none()
        return "1999.0"

    def preset(call: Call) -> None:
        call.none()
        core.reset()

    tree.add(":SYSTem:ERRor[:NEXT]", query=err_next)
    tree.add(":SYSTem:ERRor:COUNt", query=err_count)
    tree.add(":SYSTem:VERSion", query=version)
    tree.add(":SYSTem:PRESet", set=preset)
