"""Helpers shared by the simulator tests (no tests here): a raw-socket SCPI client, decoding."""

from __future__ import annotations

import socket
import time

import numpy as np


class RawClient:
    """A plain TCP client: send lines, read lines or blocks, with a deadline."""

    def __init__(self, resource: str, timeout_s: float = 3.0, terminator: bytes = b"\n") -> None:
        parts = resource.split("::")
        self.sock = socket.create_connection((parts[1], int(parts[2])), timeout=timeout_s)
        self.sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        self.buf = b""
        self.terminator = terminator

    def close(self) -> None:
        self.sock.close()

    def __enter__(self) -> RawClient:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def write(self, text: str | bytes) -> None:
        data = text.encode() if isinstance(text, str) else text
        self.sock.sendall(data + b"\n")

    def _fill(self) -> None:
        chunk = self.sock.recv(1 << 20)
        if not chunk:
            raise ConnectionError("closed by the simulator")
        self.buf += chunk

    def read_line(self) -> str:
        while self.terminator not in self.buf:
            self._fill()
        line, self.buf = self.buf.split(self.terminator, 1)
        return line.decode("latin-1")

    def read_exact(self, n: int) -> bytes:
        while len(self.buf) < n:
            self._fill()
        out, self.buf = self.buf[:n], self.buf[n:]
        return out

    def query(self, text: str) -> str:
        self.write(text)
        return self.read_line()

    def read_block(self) -> bytes:
        """A definite-length block plus its terminator."""
        head = self.read_exact(2)
        assert head[:1] == b"#", head
        digits = int(head[1:2])
        length = int(self.read_exact(digits))
        payload = self.read_exact(length)
        assert self.read_exact(len(self.terminator)) == self.terminator
        return payload

    def expect_silence(self, seconds: float = 0.3) -> bytes:
        """Whatever arrives within ``seconds`` (tests expect b"")."""
        self.sock.settimeout(seconds)
        try:
            self._fill()
        except TimeoutError:
            pass
        finally:
            self.sock.settimeout(3.0)
        out, self.buf = self.buf, b""
        return out

    def errors(self) -> list[int]:
        """Drain the generic error queue; codes, oldest first."""
        codes = []
        for _ in range(50):
            code = int(self.query(":SYST:ERR?").split(",")[0])
            if code == 0:
                return codes
            codes.append(code)
        raise AssertionError("error queue does not drain")


def complex_from_ascii(text: str) -> np.ndarray:
    values = np.array([float(v) for v in text.split(",")])
    return values[0::2] + 1j * values[1::2]


def sweep_generic(client: RawClient, start: float, stop: float, points: int,
                  params: tuple[str, ...] = ("S11",)) -> dict[str, np.ndarray]:
    """Configure, sweep and read traces as REAL,64 big-endian blocks."""
    client.write(f":SENS:FREQ:STAR {start!r};STOP {stop!r};:SENS:SWE:POIN {points};"
                 ":FORM REAL,64;:FORM:BORD NORM")
    assert client.query(":INIT;*OPC?") == "1"
    out = {}
    for name in params:
        client.write(f":TRAC? {name}")
        values = np.frombuffer(client.read_block(), dtype=">f8")
        out[name] = values[0::2] + 1j * values[1::2]
    return out


def wait_for(predicate, timeout_s: float = 3.0) -> bool:
    end = time.monotonic() + timeout_s
    while time.monotonic() < end:
        if predicate():
            return True
        time.sleep(0.01)
    return False
