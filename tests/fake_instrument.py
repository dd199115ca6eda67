"""A small fake analyzer on a real loopback socket, honest or hostile on purpose.

It speaks just enough of the generic SCPI dialect (configs/dialects/scpi-generic.yaml) for
``sweepd run`` to open, configure and sweep, and then misbehaves in one chosen way:

- ``honest``        answers everything (the control case);
- ``slow_claim``    reports a sweep time of 3600 s (issue: sweep time trusted without bound);
- ``liar``          reports 0.3 s, then never answers the trace query;
- ``flood``         its error queue never empties, each entry 200 characters long;
- ``truncate``      sends half of the trace block and then nothing;
- ``silent``        stops answering after the settings are read back;
- ``garbage``       answers the trace query with bytes that are no block;
- ``wrong_length``  sends a block one value short;
- ``huge_header``   announces a block of 999,999,999 bytes and sends a few;
- ``endless_line``  answers the sweep-time query with 2 MB of digits and no terminator;
- ``never_done``    its condition register (``:STAT:OPER:COND?``) says "sweeping" forever.

Quirk options shape honest replies: ``triplets`` (each point as frequency, re, im),
``pad`` (NUL bytes and blanks around replies),
``quote`` (replies wrapped in double quotes), ``read_request`` (a reply is released only
after a separate ``READ`` message), ``identity`` (its own identity query and reply).
Everything is bounded: the server thread stops on ``close()``.
"""

from __future__ import annotations

import contextlib
import socket
import threading

import numpy as np

MODES = ("honest", "slow_claim", "liar", "flood", "truncate", "silent", "garbage",
         "wrong_length", "huge_header", "endless_line", "never_done")


class FakeInstrument:
    """One client at a time on 127.0.0.1; see the module docstring."""

    def __init__(self, mode: str = "honest", *, pad: bool = False, quote: bool = False,
                 read_request: bool = False, triplets: bool = False,
                 identity: tuple[str, str] = ("*IDN?", "fake-maker,fake-vna,F001,1.0")) -> None:
        assert mode in MODES, mode
        self.mode, self.pad, self.quote, self.read_request = mode, pad, quote, read_request
        self.triplets = triplets
        self.identity_query, self.identity_reply = identity
        self.settings = {"STAR": 1e9, "STOP": 2e9, "POIN": 11.0, "POW": 0.0, "BAND": 1e3,
                         "AVER:COUN": 1.0}
        self.format, self.border, self.avg_state = "ASC", "NORM", "0"
        self.received: list[str] = []
        self.held: list[bytes] = []
        self.server = socket.socket()
        self.server.bind(("127.0.0.1", 0))
        self.server.listen(2)
        self.server.settimeout(0.2)
        self.resource = f"TCPIP::127.0.0.1::{self.server.getsockname()[1]}::SOCKET"
        self._stop = threading.Event()
        self._threads: list[threading.Thread] = []
        self._thread = threading.Thread(target=self._serve, daemon=True)

    def __enter__(self) -> FakeInstrument:
        self._thread.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        self._stop.set()
        self.server.close()
        self._thread.join(5)
        for thread in self._threads:
            thread.join(5)

    # -- serving -------------------------------------------------------------------------
    def _serve(self) -> None:
        while not self._stop.is_set():
            try:
                conn, _ = self.server.accept()
            except TimeoutError:
                continue
            except OSError:
                return
            thread = threading.Thread(target=self._client, args=(conn,), daemon=True)
            self._threads.append(thread)
            thread.start()

    def _client(self, conn: socket.socket) -> None:
        conn.settimeout(0.2)
        buf = b""
        with conn:
            while not self._stop.is_set():
                try:
                    chunk = conn.recv(65536)
                except TimeoutError:
                    continue
                except OSError:
                    return
                if not chunk:
                    return
                buf += chunk
                while b"\n" in buf:
                    line, buf = buf.split(b"\n", 1)
                    reply = self._message(line.decode("ascii", "replace").strip())
                    with contextlib.suppress(OSError):
                        if reply:
                            conn.sendall(reply)

    def _message(self, message: str) -> bytes:
        self.received.append(message)
        if message.upper() == "READ" and self.read_request:
            return self.held.pop(0) if self.held else b""
        parts = [self._unit(u.strip()) for u in message.split(";") if u.strip()]
        replies = [p for p in parts if p is not None]
        if not replies:
            return b""
        reply = b";".join(replies) + b"\n"
        if self.read_request:
            self.held.append(reply)
            return b""
        return reply

    # -- commands ------------------------------------------------------------------------
    def _unit(self, unit: str) -> bytes | None:
        header, _, arg = unit.partition(" ")
        head = header.upper().lstrip(":")
        if head == self.identity_query.upper():
            return self._text(self.identity_reply)
        if head.startswith("SYST:ERR"):
            if self.mode == "flood":
                return self._text('-350,"' + "Queue overflow; " * 12 + '"')
            return b'0,"No error"'
        if head == "SENS:SWE:TIME?":
            return self._sweep_time()
        if head.startswith("TRAC:DATA?"):
            return self._trace()
        if head in ("*OPC?",):
            return b"1"
        if head == "STAT:OPER:COND?":  # bit 4: sweeping
            return b"16" if self.mode == "never_done" else b"0"
        if head.startswith("FORM:DATA"):
            if head.endswith("?"):
                return self._text(self.format)
            self.format = arg.strip().upper()
            return None
        if head.startswith("FORM:BORD"):
            if head.endswith("?"):
                return self._text(self.border)
            self.border = arg.strip().upper()
            return None
        if head == "SENS:AVER:STAT?":
            return self._text(self.avg_state)
        if head == "SENS:AVER:STAT":
            self.avg_state = "1" if arg.strip().upper() in ("ON", "1") else "0"
            return None
        return self._setting(head, arg)

    def _setting(self, head: str, arg: str) -> bytes | None:
        for key in self.settings:
            if head.endswith(key + "?"):
                if self.mode == "silent" and key == "AVER:COUN":
                    self.mode = "mute"
                return self._text(repr(self.settings[key]))
            if head.endswith(key):
                self.settings[key] = float(arg)
                return None
        if self.mode == "mute":
            return None
        return None  # *CLS, :INIT:CONT OFF, :TRIG:SOUR IMM, :INIT:IMM, *WAI

    def _text(self, text: str) -> bytes | None:
        if self.mode == "mute":
            return None
        if self.quote:
            text = f'"{text}"'
        if self.pad:
            text = f"  {text}\0\0"
        return text.encode("ascii")

    def _sweep_time(self) -> bytes | None:
        if self.mode == "slow_claim":
            return b"3600"
        if self.mode == "liar":
            return b"0.3"
        if self.mode == "endless_line":
            return b"1" * 2_000_000  # no terminator follows
        return self._text("0.01")

    def _trace(self) -> bytes | None:
        points = int(self.settings["POIN"])
        values = np.empty(2 * points)
        values[0::2] = np.linspace(0.1, 0.5, points)
        values[1::2] = -0.2
        if self.triplets:
            freq = np.linspace(self.settings["STAR"], self.settings["STOP"], points)
            values = np.column_stack([freq, values[0::2], values[1::2]]).ravel()
        if self.mode in ("liar", "silent", "mute"):
            return None
        if self.mode == "garbage":
            return b"\x07\xff garbage where a block should be"
        if self.mode == "huge_header":
            return b"#9999999999" + b"\0" * 64
        if self.format == "ASC":
            return ",".join(repr(v) for v in values.tolist()).encode("ascii")
        order = ">" if self.border == "NORM" else "<"
        width = 4 if self.format.endswith("32") else 8
        payload = values.astype(f"{order}f{width}").tobytes()
        if self.mode == "wrong_length":
            payload = payload[: -2 * width]
        if self.mode == "truncate":
            header = f"#{len(str(len(payload)))}{len(payload)}".encode()
            return header + payload[: len(payload) // 2]
        return f"#{len(str(len(payload)))}{len(payload)}".encode() + payload

    def expected_trace(self) -> np.ndarray:
        """The S11 values an honest sweep returns."""
        points = int(self.settings["POIN"])
        return np.linspace(0.1, 0.5, points) - 0.2j
