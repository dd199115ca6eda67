"""The control channel: JSON lines on a loopback TCP port, to drive the simulated world.

Protocol: the client sends one JSON object per line, ``{"op": NAME, ...arguments}``;
the server answers each with one line, ``{"ok": true, "result": ...}`` or
``{"ok": false, "error": "<one-line message>"}``. Any number of clients may connect.

    op            arguments                                    result
    ping          -                                            "pong"
    state         -                                            instrument, bench, faults
    connect       what: open|short|load|thru|device            connected
    device        kind (kind or preset), params: {...}         device parameters
    unit          serial                                       that unit's parameters
    lot           name, [kind, nominal, spread, seed, golden]  the lot
    noise         on: true|false                               noise flag
    time_scale    value                                        time scale
    clock         [advance: s], [rate: r]                      simulated time now
    arm           kind, [count, on, endpoint, options...]      the armed fault
    schedule      [kind], [every: N], [at: [[i, kind], ...]]   faults state
    clear_faults  -                                            faults state
    drift         period_s, amplitude_c, tempco_hz_per_c,      drift settings
                  rate_hz_per_s, jitter_hz (none: drift off)
    disturb       [delay_s, z_ohm, loss_db_at_1ghz]            disturbance
    restore       -                                            null
    trigger       - (external trigger for TRIG:SOUR EXT)       null

Command line (``python -m simulators.control`` or ``sweepd fixture``):

    python -m simulators.control 127.0.0.1:40124 connect open
    python -m simulators.control 127.0.0.1:40124 device whip-915 q=12
    python -m simulators.control 127.0.0.1:40124 arm drop count=2
    python -m simulators.control 127.0.0.1:40124 schedule at=3:drop,7:stall
    python -m simulators.control 127.0.0.1:40124 state

Arguments are ``key=value`` (values read as JSON when they parse, else as text); some
operations take their main argument bare (connect WHAT, device KIND, unit SERIAL,
noise on|off, time_scale X, arm KIND). Exit status 0 on success, 2 on any error.
"""

from __future__ import annotations

import contextlib
import json
import os
import select
import socket
import sys
import threading
from typing import Any

from simulators.errors import SimError
from simulators.scpi_errors import ScpiError, format_entry

MAX_LINE = 1 << 20


class ControlError(SimError):
    """The control channel refused a request or could not be reached."""


class ControlServer:
    """Serves the control protocol for a ``SimServer`` on 127.0.0.1."""

    def __init__(self, sim: Any, port: int = 0) -> None:
        self.sim = sim
        self._sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        self._sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        self._sock.bind(("127.0.0.1", port))
        self._sock.listen(8)
        self._wake_r, self._wake_w = os.pipe()
        self.address: tuple[str, int] = ("127.0.0.1", self._sock.getsockname()[1])
        self._stopping = False
        self._threads: list[threading.Thread] = []
        self._conns: list[socket.socket] = []
        self._thread = threading.Thread(target=self._accept_loop, name="sim-control",
                                        daemon=True)

    def start(self) -> None:
        self._thread.start()

    def stop(self) -> None:
        self._stopping = True
        os.write(self._wake_w, b"x")
        for conn in list(self._conns):
            with contextlib.suppress(OSError):
                conn.shutdown(socket.SHUT_RDWR)
        self._thread.join(timeout=3.0)
        for thread in list(self._threads):
            thread.join(timeout=3.0)
        self._sock.close()
        os.close(self._wake_r)
        os.close(self._wake_w)

    def _accept_loop(self) -> None:
        while not self._stopping:
            ready, _, _ = select.select([self._sock, self._wake_r], [], [], 1.0)
            if self._stopping or self._sock not in ready:
                continue
            try:
                conn, _ = self._sock.accept()
            except OSError:
                continue
            self._conns.append(conn)
            thread = threading.Thread(target=self._serve, args=(conn,), name="sim-control-conn",
                                      daemon=True)
            self._threads = [t for t in self._threads if t.is_alive()] + [thread]
            thread.start()

    def _serve(self, conn: socket.socket) -> None:
        conn.settimeout(0.5)
        buf = b""
        try:
            while not self._stopping:
                try:
                    chunk = conn.recv(65536)
                except TimeoutError:
                    continue
                if not chunk:
                    return
                buf += chunk
                while b"\n" in buf:
                    line, buf = buf.split(b"\n", 1)
                    if line.strip():
                        conn.sendall(json.dumps(self.handle_line(line)).encode() + b"\n")
                if len(buf) > MAX_LINE:
                    conn.sendall(json.dumps(_fail("request line too long")).encode() + b"\n")
                    return
        except OSError:
            return
        finally:
            with contextlib.suppress(ValueError):
                self._conns.remove(conn)
            conn.close()

    def handle_line(self, line: bytes) -> dict[str, Any]:
        try:
            request = json.loads(line)
        except (ValueError, UnicodeDecodeError) as exc:
            return _fail(f"request is not JSON: {exc}")
        if not isinstance(request, dict) or not isinstance(request.get("op"), str):
            return _fail('request must be an object with "op"')
        op = request.pop("op")
        handler = getattr(self, "op_" + op.replace("-", "_"), None)
        if handler is None:
            return _fail(f"unknown op {op!r}; allowed: {', '.join(operations())}")
        try:
            return {"ok": True, "result": _jsonable(handler(**request))}
        except TypeError as exc:
            return _fail(f"{op}: bad arguments ({exc})")
        except SimError as exc:
            return _fail(str(exc))
        except ScpiError as exc:
            return _fail(f"{op}: {format_entry(exc.entry())}")

    # -- operations --------------------------------------------------------------------
    def op_ping(self) -> str:
        return "pong"

    def op_state(self) -> dict:
        return self.sim.state()

    def op_connect(self, what: str) -> str:
        self.sim.bench.connect(what)
        return self.sim.bench.connected

    def op_device(self, kind: str, params: dict | None = None) -> dict:
        from simulators.devices import device_params

        return device_params(self.sim.bench.set_device(kind, **(params or {})))

    def op_unit(self, serial: str) -> dict:
        return self.sim.bench.select_unit(serial)

    def op_lot(self, **spec: Any) -> dict:
        return self.sim.bench.set_lot(**spec).describe()

    def op_noise(self, on: bool) -> bool:
        self.sim.bench.noise = _flag(on, "noise: on")
        return self.sim.bench.noise

    def op_time_scale(self, value: float) -> float:
        self.sim.time_scale = float(value)
        return self.sim.time_scale

    def op_clock(self, advance: float | None = None, rate: float | None = None) -> float:
        if rate is not None:
            self.sim.clock.set_rate(float(rate))
        if advance is not None:
            self.sim.clock.advance(float(advance))
        return self.sim.clock.now()

    def op_arm(self, kind: str, **options: Any) -> dict:
        return self.sim.faults.arm(kind, **options).describe()

    def op_schedule(self, **spec: Any) -> dict:
        self.sim.faults.schedule(**spec)
        return self.sim.faults.describe()

    def op_clear_faults(self) -> dict:
        self.sim.faults.clear()
        return self.sim.faults.describe()

    def op_drift(self, **settings: Any) -> dict:
        from dataclasses import asdict

        return asdict(self.sim.bench.set_drift(**settings))

    def op_disturb(self, **settings: Any) -> dict:
        self.sim.bench.disturb(**{k: float(v) for k, v in settings.items()})
        return self.sim.bench.state()["disturbance"]

    def op_restore(self) -> None:
        self.sim.bench.restore()

    def op_trigger(self) -> None:
        self.sim.external_trigger()


def operations() -> list[str]:
    return sorted(name[3:] for name in dir(ControlServer) if name.startswith("op_"))


def _fail(message: str) -> dict[str, Any]:
    return {"ok": False, "error": message.splitlines()[0] if message else "error"}


def _flag(value: Any, what: str) -> bool:
    if isinstance(value, bool):
        return value
    if isinstance(value, str) and value.lower() in ("on", "off", "true", "false", "1", "0"):
        return value.lower() in ("on", "true", "1")
    raise SimError(f"{what} must be on or off, got {value!r}")


def _jsonable(value: Any) -> Any:
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, set, frozenset)):
        return [_jsonable(v) for v in value]
    if isinstance(value, (str, int, float, bool)) or value is None:
        return value
    if hasattr(value, "item"):
        return value.item()
    return str(value)


class SimControl:
    """Client for the control channel: ``SimControl("127.0.0.1", port).connect("open")``."""

    def __init__(self, host: str, port: int, timeout_s: float = 5.0) -> None:
        self.address = (host, int(port))
        self.timeout_s = timeout_s
        self._sock: socket.socket | None = None
        self._buf = b""

    def __enter__(self) -> SimControl:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        if self._sock is not None:
            self._sock.close()
            self._sock = None

    def call(self, op: str, **args: Any) -> Any:
        """Send one request; return its result or raise ``ControlError``."""
        where = f"control {self.address[0]}:{self.address[1]}"
        try:
            if self._sock is None:
                self._sock = socket.create_connection(self.address, timeout=self.timeout_s)
            self._sock.sendall(json.dumps({"op": op, **args}).encode() + b"\n")
            while b"\n" not in self._buf:
                chunk = self._sock.recv(65536)
                if not chunk:
                    raise ControlError(f"{where}: connection closed")
                self._buf += chunk
        except OSError as exc:
            self.close()
            raise ControlError(f"{where}: {exc.strerror or exc}") from None
        line, self._buf = self._buf.split(b"\n", 1)
        reply = json.loads(line)
        if not reply.get("ok"):
            raise ControlError(f"{where}: {op}: {reply.get('error')}")
        return reply.get("result")

    # conveniences
    def connect(self, what: str) -> str:
        return self.call("connect", what=what)

    def set_device(self, kind: str, **params: Any) -> dict:
        return self.call("device", kind=kind, params=params)

    def select_unit(self, serial: str) -> dict:
        return self.call("unit", serial=serial)

    def noise(self, on: bool) -> bool:
        return self.call("noise", on=on)

    def time_scale(self, value: float) -> float:
        return self.call("time_scale", value=value)

    def arm(self, kind: str, **options: Any) -> dict:
        return self.call("arm", kind=kind, **options)

    def schedule(self, **spec: Any) -> dict:
        return self.call("schedule", **spec)

    def drift(self, **settings: float) -> dict:
        return self.call("drift", **settings)

    def disturb(self, **settings: float) -> dict:
        return self.call("disturb", **settings)

    def state(self) -> dict:
        return self.call("state")


_BARE = {"connect": "what", "device": "kind", "unit": "serial", "noise": "on",
         "time_scale": "value", "arm": "kind", "lot": "name"}


def parse_args(words: list[str]) -> tuple[str, dict[str, Any]]:
    """``["arm", "drop", "count=2"]`` → ``("arm", {"kind": "drop", "count": 2})``."""
    if not words:
        raise ControlError(f"missing operation; allowed: {', '.join(operations())}")
    op = words[0].replace("-", "_")
    args: dict[str, Any] = {}
    params: dict[str, Any] = {}
    for index, word in enumerate(words[1:]):
        if "=" not in word:
            if index == 0 and op in _BARE:
                args[_BARE[op]] = word
                continue
            raise ControlError(f"{op}: expected key=value, got {word!r}")
        key, text = word.split("=", 1)
        value = _value(text)
        if key == "at" and isinstance(value, str):
            value = [[int(i), k] for i, k in (item.split(":", 1) for item in value.split(","))]
        elif key == "at" and isinstance(value, (int, float)):
            value = [int(value)]
        if op == "device" and key != "kind":
            params[key] = value
        else:
            args[key] = value
    if op == "device":
        args["params"] = params
    return op, args


def _value(text: str) -> Any:
    try:
        return json.loads(text)
    except ValueError:
        return text


def main(argv: list[str] | None = None, prog: str = "python -m simulators.control") -> int:
    """Command line: ``ADDRESS OP [ARGS...]``; prints the result as JSON."""
    argv = list(sys.argv[1:] if argv is None else argv)
    if not argv or argv[0] in ("-h", "--help"):
        print(f"usage: {prog} HOST:PORT OPERATION [key=value ...]\n"
              f"operations: {', '.join(operations())}")
        return 0 if argv else 2
    try:
        host, _, port = argv[0].rpartition(":")
        if not host or not port.isdigit():
            raise ControlError(f"address must be HOST:PORT, got {argv[0]!r}")
        op, args = parse_args(argv[1:])
        with SimControl(host, int(port)) as client:
            result = client.call(op, **args)
    except (ControlError, ValueError) as exc:
        print(f"{prog}: error: {str(exc).splitlines()[0]}", file=sys.stderr)
        return 2
    if result is None:  # an operation with nothing to report: say it was done
        print(DONE.get(op, f"{op}: done"))
    else:
        print(json.dumps(result, indent=2 if op == "state" else None))
    return 0


DONE = {"restore": "restore: done; the fixture is back where it was (no disturbance)",
        "trigger": "trigger: sent"}


if __name__ == "__main__":
    sys.exit(main())
