"""The ``tabletop`` personality: an invented command set with other data conventions.

ASCII only; replies end in CR LF; frequencies in MHz; trace values as ``dB,deg`` pairs.
Each setting (and the standard switch) takes effect only after a settle time of 25 ms ×
time scale: queries before then return the old value and ``MEASure:RUN`` sweeps with the
old settings, so its dialect sends ``*OPC?`` after each setting. ``RECeiver:WIDTh`` is
rounded to the nearest step of a 1-2-5 series (read it back). A settings change does not
invalidate the last sweep: it stays readable until the next ``MEASure:RUN``, and
``MEASure:AXIS?`` tells which frequencies it has. ``MEASure:RUN`` with LOW
above HIGH (and more than one point) queues −221 and does not sweep. ``MEASure:VALues?``
also answers the switch terms of the last sweep: ``TERM2`` (a2/b2 at port 2 while port 1
drives) and ``TERM1`` (a1/b1 at port 1 while port 2 drives).
"""

from __future__ import annotations

import math
from collections.abc import Callable

from simulators.common_cmds import add_common
from simulators.encoding import db_deg_pairs, fixed_list
from simulators.instrument import AnalyzerCore
from simulators.scpi_errors import ScpiError, format_entry
from simulators.scpi_params import format_number
from simulators.scpi_parser import Call, Reply
from simulators.scpi_tree import CommandTree

IDENTITY = "sweepd-sim,tabletop-2port,SIM0002,2.3"
TERMINATOR = b"\r\n"
SETTLE_S = 0.025
# TERM2: a2/b2 at port 2's termination while port 1 drives; TERM1: a1/b1 the other way
TRACES: dict[str, tuple[int, int] | int] = {"REFL1": (0, 0), "TRANS21": (1, 0),
                                            "TRANS12": (0, 1), "REFL2": (1, 1),
                                            "TERM2": 0, "TERM1": 1}
STANDARDS = {"OPEN": "open", "SHORT": "short", "LOAD": "load", "THRU": "thru", "DUT": "device"}
WIDTHS = sorted(m * 10.0**e for e in range(7) for m in (1, 2, 5) if m * 10.0**e <= 1e6)


def nearest_width(hz: float) -> float:
    """The 1-2-5 series step closest to ``hz`` on a log scale."""
    return min(WIDTHS, key=lambda w: abs(math.log(w / hz)))


def build(core: AnalyzerCore) -> CommandTree:
    tree = CommandTree()
    core.stale_on_change = False  # the last sweep stays readable; MEASure:AXIS? says which
    add_common(tree, core, ("*IDN", "*RST", "*CLS", "*OPC", "*WAI"))
    opc_set = tree.common["*OPC"]
    opc_set.set = None  # only *OPC? exists here
    _add_settings(tree, core)
    _add_measure(tree, core)
    _add_switch(tree, core)
    _add_errors(tree, core)
    return tree


def _setting(tree: CommandTree, core: AnalyzerCore, pattern: str, name: str, lo: float,
             hi: float, default: float, scale: float = 1.0, integer: bool = False,
             convert: Callable[[float], float] | None = None) -> None:
    """A setting that takes effect after ``SETTLE_S`` (read back in instrument units)."""
    def set_(call: Call) -> None:
        value = call.one().number(lo, hi, default, integer=integer)
        value = int(value) if integer else value * scale
        if convert is not None:
            value = convert(value)
        core.defer(SETTLE_S, lambda: core.change(**{name: value}))

    def query(call: Call) -> str:
        call.none()
        core.apply_due()
        return format_number(getattr(core.settings, name) / scale)

    tree.add(pattern, set=set_, query=query)


def _add_settings(tree: CommandTree, core: AnalyzerCore) -> None:
    _setting(tree, core, "STIMulus:LOW", "start_hz", 0.01, 20000.0, 10.0, scale=1e6)
    _setting(tree, core, "STIMulus:HIGH", "stop_hz", 0.01, 20000.0, 6000.0, scale=1e6)
    _setting(tree, core, "STIMulus:COUNt", "points", 1, 200001, 201, integer=True)
    _setting(tree, core, "STIMulus:LEVel", "power_dbm", -90.0, 10.0, 0.0)
    _setting(tree, core, "RECeiver:WIDTh", "ifbw_hz", 1.0, 1e6, 1e3, convert=nearest_width)

    def avg_set(call: Call) -> None:
        n = int(call.one().number(1, 1000, 1, integer=True))
        core.defer(SETTLE_S, lambda: core.change(avg_on=n > 1, avg_count=n))

    def avg_query(call: Call) -> str:
        call.none()
        core.apply_due()
        return str(core.settings.avg_count if core.settings.avg_on else 1)

    tree.add("RECeiver:AVERage", set=avg_set, query=avg_query)


def _add_measure(tree: CommandTree, core: AnalyzerCore) -> None:
    def run(call: Call) -> None:
        call.none()
        core.apply_due()
        st = core.settings
        if st.points > 1 and st.start_hz >= st.stop_hz:
            raise ScpiError(-221, "STIMulus:LOW must be below STIMulus:HIGH")
        core.initiate(call.session.name)

    def axis(call: Call) -> Reply:
        call.none()
        data = core.trace(call.session.name)
        payload = data.replies.get(("axis",))
        if payload is None:
            payload = data.replies[("axis",)] = fixed_list(data.freq_hz / 1e6, 9)
        return Reply(payload)

    def values(call: Call) -> Reply:
        name = call.one().choice(*TRACES)
        data = core.trace(call.session.name)
        short = core.faults.take("data", call.session.name, ("wrong_count",), data.index)
        key = (name, short is not None)
        payload = data.replies.get(key)
        if payload is None:
            trace = core.values(data, TRACES[name])
            payload = db_deg_pairs(trace[:-1] if short is not None else trace)
            if short is None:
                data.replies[key] = payload
        return Reply(payload, data=True)

    tree.add("MEASure:RUN", set=run)
    tree.add("MEASure:AXIS", query=axis)
    tree.add("MEASure:VALues", query=values)


def _add_switch(tree: CommandTree, core: AnalyzerCore) -> None:
    def switch_set(call: Call) -> None:
        target = STANDARDS[call.one().choice(*STANDARDS)]
        core.defer(SETTLE_S, lambda: core.bench.connect(target))

    def switch_query(call: Call) -> str:
        call.none()
        core.apply_due()
        connected = core.bench.connected
        return next(k for k, v in STANDARDS.items() if v == connected)

    tree.add("SWITch:STANdard", set=switch_set, query=switch_query)


def _add_errors(tree: CommandTree, core: AnalyzerCore) -> None:
    def err_next(call: Call) -> str:
        call.none()
        return format_entry(core.status.pop())

    def err_clear(call: Call) -> None:
        call.none()
        core.status.clear()

    tree.add("ERRor:NEXT", query=err_next)
    tree.add("ERRor:CLEar", set=err_clear)
