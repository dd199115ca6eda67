"""The ``slotted`` personality: measurement slots, polling, big-endian blocks, CR LF.

An invented command tree unlike the other two. A trace is read from a measurement slot:
``SLOT<n>:DEFine S21`` binds slot n (1..6) to an S-parameter (or to a switch term of the
sweep: ``A2B2`` with port 1 driving, ``A1B1`` with port 2 driving), ``SLOT:SELect <n>`` makes
it the active one, and ``FETCh:SLOT? <n>`` returns its data only while slot n is defined
and selected (else −221). ``ACQuire:SINGle`` starts a sweep; completion is seen by
polling ``ACQuire:BUSY?`` (1 while sweeping, 0 when done) or ``*ESR?`` bit 0 after
``*OPC``. ``ACQuire:DURation?`` answers the sweep time in milliseconds.

Replies end in CR LF. There is no ``*IDN?``: ``UNIT:IDENtity?`` answers a quoted
``"maker/model/serial/firmware"``. Frequencies are set in Hz and read back in kHz with a
unit suffix (``2450000.000 KHZ``), power as ``-10.00 DBM``, the point count padded with
blanks. Binary data are always big-endian (``FORMat:DATA REAL32|REAL64|TEXT``);
``FETCh:AXIS?`` is a big-endian REAL64 block of frequencies in kHz. ``UNIT:PRESet``
keeps the unit busy for 40 ms × time scale: any command before then queues −300.
"""

from __future__ import annotations

import time

import numpy as np

from simulators.common_cmds import add_common
from simulators.encoding import ascii_list, interleaved, real_block
from simulators.instrument import AnalyzerCore
from simulators.scpi_errors import ScpiError, format_entry
from simulators.scpi_params import format_number
from simulators.scpi_parser import Call, Reply
from simulators.scpi_tree import CommandTree

IDENTITY = "sweepd-sim/slotted-2port/SIM0003/0.9"
TERMINATOR = b"\r\n"
PRESET_S = 0.040
SLOTS = 6
# what a slot can measure: raw S (row, col), or a switch term: A2B2 (port 1 driving),
# A1B1 (port 2 driving)
PARAMETERS: dict[str, tuple[int, int] | int] = {"S11": (0, 0), "S21": (1, 0), "S12": (0, 1),
                                                "S22": (1, 1), "A2B2": 0, "A1B1": 1}
PATHS = {"OPEN": "open", "SHORT": "short", "LOAD": "load", "THRU": "thru", "DUT": "device"}
FORMATS = {"REAL32": ("REAL", 32), "REAL64": ("REAL", 64), "TEXT": ("ASC", 64)}


class SlotState:
    """The measurement slots and the preset window of one simulated unit."""

    def __init__(self) -> None:
        self.defined: dict[int, str] = {}
        self.selected = 0
        self.busy_until = 0.0


def build(core: AnalyzerCore) -> CommandTree:
    """The command tree of this personality, bound to ``core``."""
    tree = CommandTree()
    state = SlotState()
    power_on_reset = core.reset

    def reset() -> None:  # *RST and a reboot forget the slots too
        power_on_reset()
        state.defined.clear()
        state.selected = 0

    core.reset = reset  # type: ignore[method-assign]
    add_common(tree, core, ("*RST", "*CLS", "*OPC", "*WAI", "*ESR"))
    add = _guarded_adder(tree, core, state)
    _add_channel(add, core)
    _add_slots(add, core, state)
    _add_acquire(add, core)
    _add_unit(add, core, state)
    return tree


def _guarded_adder(tree: CommandTree, core: AnalyzerCore, state: SlotState):
    """``add(pattern, set=, query=)`` whose handlers refuse to run during a preset."""

    def guard(handler):
        if handler is None:
            return None

        def run(call: Call):
            if time.monotonic() < state.busy_until:
                raise ScpiError(-300, f"{call.header}; busy presetting")
            return handler(call)

        return run

    def add(pattern: str, set=None, query=None) -> None:
        tree.add(pattern, set=guard(set), query=guard(query))

    return add


def _add_channel(add, core: AnalyzerCore) -> None:
    def setting(pattern: str, name: str, lo: float, hi: float, shown, integer=False) -> None:
        def set_(call: Call) -> None:
            value = call.one().number(lo, hi, None, integer=integer)
            core.change(**{name: int(value) if integer else value})

        def query(call: Call) -> str:
            call.none()
            return shown(getattr(core.settings, name))

        add(pattern, set=set_, query=query)

    setting("CHANnel:FSTart", "start_hz", 10e3, 20e9, lambda v: f"{v / 1e3:.3f} KHZ")
    setting("CHANnel:FSTop", "stop_hz", 10e3, 20e9, lambda v: f"{v / 1e3:.3f} KHZ")
    setting("CHANnel:NPOints", "points", 1, 100001, lambda v: f"{v:>8d}", integer=True)
    setting("CHANnel:LEVel", "power_dbm", -80.0, 10.0, lambda v: f"{v:.2f} DBM")
    setting("CHANnel:RBW", "ifbw_hz", 1.0, 1e6, lambda v: f"{format_number(v)} HZ")

    def navg_set(call: Call) -> None:
        n = int(call.one().number(1, 999, None, integer=True))
        core.change(avg_on=n > 1, avg_count=n)

    def navg_query(call: Call) -> str:
        call.none()
        return str(core.settings.avg_count if core.settings.avg_on else 1)

    add("CHANnel:NAVG", set=navg_set, query=navg_query)

    def fmt_set(call: Call) -> None:
        kind, width = FORMATS[call.one().choice(*FORMATS)]
        core.change(data_format=kind, data_width=width, byte_order="NORM")

    def fmt_query(call: Call) -> str:
        call.none()
        st = core.settings
        return "TEXT" if st.data_format == "ASC" else f"REAL{st.data_width}"

    add("FORMat:DATA", set=fmt_set, query=fmt_query)


def _add_slots(add, core: AnalyzerCore, state: SlotState) -> None:
    def define(call: Call) -> None:
        state.defined[call.suffixes["SLOT"]] = call.one().choice(*PARAMETERS)

    def define_query(call: Call) -> str:
        call.none()
        return state.defined.get(call.suffixes["SLOT"], "NONE")

    def delete(call: Call) -> None:
        call.none()
        slot = call.suffixes["SLOT"]
        state.defined.pop(slot, None)
        if state.selected == slot:
            state.selected = 0

    def select(call: Call) -> None:
        slot = int(call.one().number(1, SLOTS, None, integer=True))
        if slot not in state.defined:
            raise ScpiError(-221, f"{call.header}; slot {slot} is not defined")
        state.selected = slot

    def select_query(call: Call) -> str:
        call.none()
        return str(state.selected)

    add(f"SLOT#{SLOTS}:DEFine", set=define, query=define_query)
    add(f"SLOT#{SLOTS}:DELete", set=delete)
    add("SLOT:SELect", set=select, query=select_query)

    def fetch(call: Call) -> Reply:
        slot = int(call.one().number(1, SLOTS, None, integer=True))
        if slot not in state.defined or slot != state.selected:
            raise ScpiError(-221, f"{call.header}; slot {slot} is not defined and selected")
        return _slot_data(core, call, state.defined[slot])

    def axis(call: Call) -> Reply:
        call.none()
        data = core.trace(call.session.name)
        payload = data.replies.get(("axis",))
        if payload is None:
            payload = data.replies[("axis",)] = real_block(data.freq_hz / 1e3, 64, True)
        return Reply(payload)

    add("FETCh:SLOT", query=fetch)
    add("FETCh:AXIS", query=axis)


def _slot_data(core: AnalyzerCore, call: Call, parameter: str) -> Reply:
    data = core.trace(call.session.name)
    st = core.settings
    short = core.faults.take("data", call.session.name, ("wrong_count",), data.index)
    key = ("slot", parameter, st.data_format, st.data_width, short is not None)
    payload = data.replies.get(key)
    if payload is None:
        values = core.values(data, PARAMETERS[parameter])
        numbers = interleaved(values[:-1] if short is not None else values)
        if st.data_format == "ASC":
            payload = ascii_list(numbers)
        else:
            payload = real_block(np.asarray(numbers), st.data_width, True)
        if short is None:
            data.replies[key] = payload
    return Reply(payload, data=True)


def _add_acquire(add, core: AnalyzerCore) -> None:
    def single(call: Call) -> None:
        call.none()
        core.initiate(call.session.name)

    def busy(call: Call) -> str:
        call.none()
        return "1" if core.sweeping() else "0"

    def duration(call: Call) -> str:
        call.none()
        return f"{core.sweep_time_s() * 1e3:.3f}"

    add("ACQuire:SINGle", set=single)
    add("ACQuire:BUSY", query=busy)
    add("ACQuire:DURation", query=duration)


def _add_unit(add, core: AnalyzerCore, state: SlotState) -> None:
    def identity(call: Call) -> str:
        call.none()
        return f'"{core.identity}"'

    def preset(call: Call) -> None:
        call.none()
        core.reset()
        state.busy_until = time.monotonic() + PRESET_S * core.time_scale

    def path_set(call: Call) -> None:
        core.bench.connect(PATHS[call.one().choice(*PATHS)])

    def path_query(call: Call) -> str:
        call.none()
        now = core.bench.connected
        return '"' + next(k for k, v in PATHS.items() if v == now) + '"'

    def err_next(call: Call) -> str:
        call.none()
        return format_entry(core.status.pop())

    add("UNIT:IDENtity", query=identity)
    add("UNIT:PRESet", set=preset)
    add("FIXTure:PATH", set=path_set, query=path_query)
    add("STATus:ERRor", query=err_next)
