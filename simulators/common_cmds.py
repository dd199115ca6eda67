"""IEEE Std 488.2 common commands (§10) shared by both personalities."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from simulators.instrument import AnalyzerCore
from simulators.scpi_parser import Call
from simulators.scpi_tree import CommandTree

ALL = ("*IDN", "*RST", "*CLS", "*OPC", "*WAI", "*ESR", "*ESE", "*SRE", "*STB", "*TST", "*TRG")


Handler = Callable[[Call], Any]
Pair = tuple[Handler | None, Handler | None]  # (set, query)


def add_common(tree: CommandTree, core: AnalyzerCore, names: tuple[str, ...] = ALL) -> None:
    """Register the named common commands."""
    table = {**_operation_commands(core), **_status_commands(core)}
    for name in names:
        set_, query = table[name]
        tree.add(name, set=set_, query=query)


def _operation_commands(core: AnalyzerCore) -> dict[str, Pair]:
    """*IDN, *RST, *CLS, *OPC/*OPC?, *WAI, *TST and *TRG (§10.14, .32, .3, .18-19, .39,
    .38, .37)."""
    def idn(call: Call) -> str:
        call.none()
        return core.identity

    def rst(call: Call) -> None:
        call.none()
        core.reset()

    def cls(call: Call) -> None:
        call.none()
        core.status.clear()
        core.opc_pending = False

    def opc(call: Call) -> None:
        call.none()
        core.opc_pending = True
        core.poll_opc()

    def opc_query(call: Call) -> str:
        call.none()
        core.wait_idle()
        return "1"

    def wai(call: Call) -> None:
        call.none()
        core.wait_idle()

    def tst(call: Call) -> str:
        call.none()
        return "0"

    def trg(call: Call) -> None:
        call.none()
        core.trigger(getattr(call.session, "name", None), "BUS")

    return {"*IDN": (None, idn), "*RST": (rst, None), "*CLS": (cls, None),
            "*OPC": (opc, opc_query), "*WAI": (wai, None), "*TST": (None, tst),
            "*TRG": (trg, None)}


def _status_commands(core: AnalyzerCore) -> dict[str, Pair]:
    """*ESR?, *ESE, *SRE and *STB? (§10.12, .10, .34, .36)."""
    def esr(call: Call) -> str:
        call.none()
        core.poll_opc()
        return str(core.status.read_esr())

    def mask(attr: str) -> Pair:
        def set_(call: Call) -> None:
            setattr(core.status, attr, int(call.one().number(0, 255, 0, integer=True)))

        def get(call: Call) -> str:
            call.none()
            return str(getattr(core.status, attr))

        return set_, get

    def stb(call: Call) -> str:
        call.none()
        core.poll_opc()
        return str(core.status.stb())

    return {"*ESR": (None, esr), "*ESE": mask("ese"), "*SRE": mask("sre"),
            "*STB": (None, stb)}
