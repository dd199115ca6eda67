"""``SimServer``: the simulated analyzer with its endpoints and control channel, in-process.

    from simulators.server import SimServer
    with SimServer(personality="generic", serial=True, time_scale=0.0, noise=False) as sim:
        sim.tcp_resource        # "TCPIP::127.0.0.1::<port>::SOCKET"
        sim.serial_resource     # "ASRL/dev/pts/<n>::INSTR" (None without serial=True)
        sim.hislip_resource     # "TCPIP::127.0.0.1::hislip0,<port>::INSTR" (with hislip_port)
        sim.vxi11_resource      # "TCPIP::127.0.0.1,<port>::INSTR" (with vxi11_port)
        sim.control_address     # ("127.0.0.1", port)
        sim.bench.connect("open")
        sim.faults.arm("drop")

Threads, not processes; ``stop()`` closes everything and joins the threads. Defaults suit
tests (no noise, no waiting); the command line defaults to real time with noise.
"""

from __future__ import annotations

from pathlib import Path
from types import ModuleType
from typing import Any

from simulators import generic, slotted, tabletop
from simulators.bench import Bench
from simulators.calkit import DEFAULT_KIT
from simulators.clock import SimClock
from simulators.endpoints import SerialEndpoint, TcpEndpoint
from simulators.errors import SimError
from simulators.faults import Fault, Faults
from simulators.instrument import AnalyzerCore

PERSONALITIES: dict[str, ModuleType] = {"generic": generic, "tabletop": tabletop,
                                         "slotted": slotted}


class SimServer:
    """A running simulated analyzer (see the module docstring)."""

    def __init__(self, personality: str = "generic", tcp_port: int | None = 0,
                 serial: bool = False, hislip_port: int | None = None,
                 vxi11_port: int | None = None,
                 control_port: int | None = 0, time_scale: float = 0.0,
                 noise: bool = False, seed: int = 1, frozen: bool = False,
                 kit: str | Path = DEFAULT_KIT, device: str = "patch-2g45",
                 lot: str = "patch-2g45", clock_rate: float = 1.0) -> None:
        module = PERSONALITIES.get(personality)
        if module is None:
            raise SimError(f"sim: unknown personality {personality!r}; allowed: "
                           f"{', '.join(PERSONALITIES)}")
        if not time_scale >= 0:
            raise SimError(f"sim: time scale must be >= 0, got {time_scale}")
        if tcp_port is not None and not 0 <= tcp_port <= 65535:
            raise SimError(f"sim: TCP port must be 0..65535, got {tcp_port}")
        if hislip_port is not None and not 0 <= hislip_port <= 65535:
            raise SimError(f"sim: HiSLIP port must be 0..65535, got {hislip_port}")
        self.personality = personality
        self.clock = SimClock(clock_rate)
        self.bench = Bench(kit, seed, noise, self.clock, device, lot)
        self.faults = Faults()
        self.core = AnalyzerCore(self.bench, self.faults, module.IDENTITY, time_scale, frozen)
        self.core.on_reboot = self._on_reboot
        self.faults.now_handler = self._fault_now
        self.tree = module.build(self.core)
        self.terminator: bytes = module.TERMINATOR
        self._seed = seed
        self._tcp_port, self._serial, self._control_port = tcp_port, serial, control_port
        self.tcp: TcpEndpoint | None = None
        self.serial: SerialEndpoint | None = None
        self._hislip_port = hislip_port
        self.hislip: Any = None
        self._vxi11_port = vxi11_port
        self.vxi11: Any = None
        self.control: Any = None
        self._started = False

    # -- life cycle ------------------------------------------------------------------
    def start(self) -> SimServer:
        if self._started:
            return self
        self._started = True
        try:
            if self._tcp_port is not None:
                self.tcp = TcpEndpoint(self.core, self.tree, self.terminator, self._tcp_port,
                                       seed=self._seed)
                self.tcp.start()
            if self._serial:
                self.serial = SerialEndpoint(self.core, self.tree, self.terminator, self._seed)
                self.serial.start()
            if self._hislip_port is not None:
                from simulators.hislip import HislipEndpoint

                self.hislip = HislipEndpoint(self.core, self.tree, self.terminator,
                                             self._hislip_port, seed=self._seed)
                self.hislip.start()
            if self._vxi11_port is not None:
                from simulators.vxi11 import VxiEndpoint

                self.vxi11 = VxiEndpoint(self.core, self.tree, self.terminator,
                                         self._vxi11_port, seed=self._seed)
                self.vxi11.start()
            if self._control_port is not None:
                from simulators.control import ControlServer

                self.control = ControlServer(self, self._control_port)
                self.control.start()
        except OSError as exc:
            self.stop()
            raise SimError(f"sim: cannot open an endpoint: {exc.strerror or exc}") from None
        return self

    def stop(self) -> None:
        """Close every endpoint and join the threads (a few hundred ms at most)."""
        self.core.stop()
        for part in (self.control, self.tcp, self.serial, self.hislip, self.vxi11):
            if part is not None:
                part.stop()

    def __enter__(self) -> SimServer:
        return self.start()

    def __exit__(self, *exc: object) -> None:
        self.stop()

    # -- addresses -------------------------------------------------------------------
    @property
    def tcp_resource(self) -> str | None:
        return self.tcp.resource if self.tcp else None

    @property
    def serial_resource(self) -> str | None:
        return self.serial.resource if self.serial else None

    @property
    def hislip_resource(self) -> str | None:
        return self.hislip.resource if self.hislip else None

    @property
    def vxi11_resource(self) -> str | None:
        return self.vxi11.resource if self.vxi11 else None

    @property
    def control_address(self) -> tuple[str, int] | None:
        return self.control.address if self.control else None

    def resources(self) -> list[str]:
        return [r for r in (self.tcp_resource, self.serial_resource, self.hislip_resource,
                            self.vxi11_resource) if r]

    # -- knobs -------------------------------------------------------------------------
    @property
    def time_scale(self) -> float:
        return self.core.time_scale

    @time_scale.setter
    def time_scale(self, value: float) -> None:
        value = float(value)
        if not value >= 0:
            raise SimError(f"sim: time scale must be >= 0, got {value}")
        with self.core.lock:
            self.core.time_scale = value

    def state(self) -> dict[str, Any]:
        """The world, the instrument and the faults as JSON-able values."""
        core = self.core
        with core.lock:
            st = core.settings
            instrument = {
                "personality": self.personality, "identity": core.identity,
                "sweep_count": core.sweep_count, "time_scale": core.time_scale,
                "frozen": core.frozen, "has_data": core.has_data(),
                "errors_queued": core.status.count(),
                "settings": {k: getattr(st, k) for k in st.__dataclass_fields__},
            }
        return {"instrument": instrument, "bench": self.bench.state(),
                "faults": self.faults.describe(), "resources": self.resources()}

    def external_trigger(self) -> None:
        with self.core.lock:
            self.core.trigger("control", "EXT")

    # -- internals -----------------------------------------------------------------------
    def _on_reboot(self, down_s: float) -> None:
        for endpoint in (self.tcp, self.serial, self.hislip, self.vxi11):
            if endpoint is not None:
                endpoint.on_reboot()

    def _fault_now(self, fault: Fault) -> None:
        with self.core.lock:
            if fault.kind == "error":
                self.core.status.push_entry((int(fault.options["code"]),
                                             str(fault.options["text"])))
            elif fault.kind == "reboot":
                self.core.reboot(float(fault.options["down_s"]))
