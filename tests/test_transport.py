"""The transport (drivers.transport, drivers.links) against tiny scripted peers.

Real sockets on loopback and a real pseudo-terminal; nothing is mocked. Each peer answers
the lines it receives from a script, so malformed, late, truncated and vanished replies
can be produced on purpose. Framing rules: IEEE Std 488.2 definite-length and indefinite
arbitrary blocks, newline as the message terminator on a raw socket.
"""

from __future__ import annotations

import contextlib
import os
import socket
import threading
import time
from collections.abc import Callable

import numpy as np
import pytest

from drivers.blocks import encode_block
from drivers.errors import (
    BlockError,
    ConnectError,
    ConnectionLost,
    InstrumentTimeout,
    ReplyError,
    SweepdError,
)
from drivers.transport import SerialSettings, Transport

Reply = Callable[[bytes, socket.socket], None]


class Peer:
    """A one-client instrument on 127.0.0.1 that calls ``script(line, conn)`` per line."""

    def __init__(self, script: Reply) -> None:
        self.script = script
        self.server = socket.socket()
        self.server.bind(("127.0.0.1", 0))
        self.server.listen(4)
        self.port = self.server.getsockname()[1]
        self.resource = f"TCPIP::127.0.0.1::{self.port}::SOCKET"
        self.lines: list[bytes] = []
        self.connections = 0
        self._thread = threading.Thread(target=self._serve, daemon=True)
        self._thread.start()

    def _serve(self) -> None:
        while True:
            try:
                conn, _ = self.server.accept()
            except OSError:
                return
            self.connections += 1
            threading.Thread(target=self._client, args=(conn,), daemon=True).start()

    def _client(self, conn: socket.socket) -> None:
        buf = b""
        with conn:
            while True:
                try:
                    chunk = conn.recv(65536)
                except OSError:
                    return
                if not chunk:
                    return
                buf += chunk
                while b"\n" in buf:
                    line, buf = buf.split(b"\n", 1)
                    self.lines.append(line)
                    try:
                        self.script(line, conn)
                    except OSError:
                        return

    def close(self) -> None:
        self.server.close()


@pytest.fixture
def peer_factory():
    peers: list[Peer] = []

    def make(script: Reply) -> Peer:
        peer = Peer(script)
        peers.append(peer)
        return peer

    yield make
    for peer in peers:
        peer.close()


def echo_script(line: bytes, conn: socket.socket) -> None:
    """``Q?`` answers ``Q``; ``BLK? n`` answers an n-value REAL,64 little-endian block."""
    if line.startswith(b"BLK? "):
        count = int(line.split()[1])
        values = np.arange(count, dtype=np.float64) + 0.5
        conn.sendall(encode_block(values, "real64", "little") + b"\n")
    elif line.endswith(b"?"):
        conn.sendall(line[:-1] + b"\n")


def transport(peer: Peer, **kw) -> Transport:
    t = Transport(peer.resource, timeout_s=kw.pop("timeout_s", 1.0), **kw)
    t.open()
    return t


# -- construction and connecting --------------------------------------------------------
def test_constructing_does_no_io() -> None:
    t = Transport("TCPIP::127.0.0.1::1::SOCKET")
    assert not t.is_open
    with pytest.raises(ConnectionLost, match=r"not connected \(sending '\*IDN\?'\)"):
        t.query("*IDN?")


def test_refused_connection_is_a_connect_error_naming_the_resource() -> None:
    with socket.socket() as s:  # a port that was free a moment ago: nobody listens there
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    resource = f"TCPIP::127.0.0.1::{port}::SOCKET"
    t = Transport(resource, connect_timeout_s=2.0)
    started = time.monotonic()
    with pytest.raises(ConnectError) as info:
        t.open()
    assert time.monotonic() - started < 1.5
    assert str(info.value) == f"instrument {resource}: cannot open: Connection refused"
    assert isinstance(info.value, OSError) and isinstance(info.value, SweepdError)


@pytest.mark.parametrize(
    ("resource", "words"),
    [
        ("garbage::x", "not a supported VISA resource string: 'garbage::x' (use TCPIP::"),
        ("TCPIP::h::5025::SOCKET;*RST", "(must not contain ';')"),
        ("GPIB0::5::INSTR", "(GPIB is not supported; use "),
        ("TCPIP::h::5025 ::SOCKET", "(must not contain spaces or control characters)"),
        ("TCPIP::h::70000::SOCKET", "(port 70000 is outside 1..65535)"),
    ],
)
def test_resources_outside_the_rules_are_refused_before_pyvisa(
    resource: str, words: str, capfd: pytest.CaptureFixture
) -> None:
    # The same rules as plans (drivers.resources); pyvisa never sees the string, so no
    # third-party warning line comes before ours.
    with pytest.raises(ConnectError) as info:
        Transport(resource)
    assert str(info.value).startswith("instrument: not a supported VISA resource string")
    assert words in str(info.value) and "\n" not in str(info.value)
    assert capfd.readouterr().err == ""


@pytest.mark.parametrize(
    ("resource", "words"),
    [
        ("ASRL/dev/sweepd-no-such-port::INSTR", "could not open port /dev/sweepd-no-such-port"),
        (
            "TCPIP::no-such-host.invalid::5025::SOCKET",
            "cannot open: unknown host 'no-such-host.invalid'",
        ),
    ],
)
def test_bad_resources(resource: str, words: str) -> None:
    with pytest.raises(ConnectError) as info:
        Transport(resource, connect_timeout_s=1.0).open()
    message = str(info.value)
    assert message.startswith(f"instrument {resource}: ") and words in message
    assert "\n" not in message


@pytest.mark.parametrize(
    ("kwargs", "words"),
    [
        ({"timeout_s": 0}, "timeout_s must be a positive number of seconds"),
        ({"connect_timeout_s": -1}, "connect_timeout_s must be a positive"),
        ({"serial": {"baud": 9600}}, "serial.baud: unknown setting"),
        ({"serial": {"parity": "maybe"}}, "serial.parity: must be one of none, odd, even"),
        ({"serial": {"baud_rate": 10}}, "serial.baud_rate: must be an integer of at least 50"),
    ],
)
def test_bad_arguments(kwargs: dict, words: str) -> None:
    with pytest.raises(ConnectError, match=words):
        Transport("ASRL/dev/null::INSTR", **kwargs)


def test_serial_settings_from_mapping() -> None:
    settings = SerialSettings.from_mapping({"baud_rate": 9600, "parity": "even", "stop_bits": 2})
    assert settings == SerialSettings(9600, 8, "even", 2, "none")


# -- lines -------------------------------------------------------------------------------
def test_query_and_close(peer_factory) -> None:
    peer = peer_factory(echo_script)
    t = transport(peer)
    assert t.query("ABC?") == "ABC"
    t.write("SET 1")
    assert t.query("XYZ?") == "XYZ"
    assert peer.lines == [b"ABC?", b"SET 1", b"XYZ?"]
    t.close()
    t.close()
    assert not t.is_open


def test_crlf_terminator_and_lone_lf(peer_factory) -> None:
    def script(line: bytes, conn: socket.socket) -> None:
        conn.sendall(b"one\r\n" if line == b"A?" else b"two\n")

    t = transport(peer_factory(script), read_termination="\r\n")
    assert t.query("A?") == "one"
    assert t.query("B?") == "two"


def test_replies_split_and_joined_across_packets(peer_factory) -> None:
    def script(line: bytes, conn: socket.socket) -> None:
        if line == b"A?":
            for piece in (b"he", b"ll", b"o\nwor"):
                conn.sendall(piece)
                time.sleep(0.01)
        else:
            conn.sendall(b"ld\n")

    t = transport(peer_factory(script))
    assert t.query("A?") == "hello"
    assert t.query("B?") == "world"


def test_bytes_after_a_reply_are_kept_for_the_next_read(peer_factory) -> None:
    def script(line: bytes, conn: socket.socket) -> None:
        if line == b"TWO?":
            conn.sendall(b"first\nsecond\n")

    t = transport(peer_factory(script))
    assert t.query("TWO?") == "first"
    assert t.read_line("TWO?") == "second"


def test_timeout_names_command_and_seconds(peer_factory) -> None:
    t = transport(peer_factory(lambda line, conn: None), timeout_s=0.2)
    started = time.monotonic()
    with pytest.raises(InstrumentTimeout) as info:
        t.query(":SENS:SWE:POIN?")
    elapsed = time.monotonic() - started
    assert 0.18 < elapsed < 1.0
    assert str(info.value) == (
        f"instrument {t.resource}: no complete reply to ':SENS:SWE:POIN?' within 0.2 s"
    )
    assert isinstance(info.value, TimeoutError)


def test_partial_reply_is_quoted_on_timeout(peer_factory) -> None:
    t = transport(peer_factory(lambda line, conn: conn.sendall(b"12")), timeout_s=0.2)
    with pytest.raises(InstrumentTimeout, match=r"2 bytes arrived: starts b'12'"):
        t.query("A?")


def test_late_reply_is_never_taken_for_the_next_answer(peer_factory) -> None:
    def script(line: bytes, conn: socket.socket) -> None:
        if line == b"SLOW?":
            time.sleep(0.35)
            conn.sendall(b"late\n")
        else:
            conn.sendall(line[:-1] + b"\n")

    peer = peer_factory(script)
    t = transport(peer, timeout_s=0.2)
    with pytest.raises(InstrumentTimeout):
        t.query("SLOW?")
    assert t.query("NEXT?") == "NEXT"
    assert t.query("AGAIN?") == "AGAIN"


def test_reply_that_never_comes_leads_to_a_fresh_connection(peer_factory) -> None:
    peer = peer_factory(lambda line, conn: None if line == b"LOST?" else echo_script(line, conn))
    t = transport(peer, timeout_s=0.2)
    with pytest.raises(InstrumentTimeout):
        t.query("LOST?")
    assert t.query("NEXT?") == "NEXT"
    assert peer.connections == 2


def test_peer_closing_is_connection_lost_at_once(peer_factory) -> None:
    def script(line: bytes, conn: socket.socket) -> None:
        conn.shutdown(socket.SHUT_RDWR)
        conn.close()

    t = transport(peer_factory(script), timeout_s=5.0)
    started = time.monotonic()
    with pytest.raises(ConnectionLost) as info:
        t.query(":TRAC:DATA? S11")
    assert time.monotonic() - started < 1.0  # no spinning until the deadline
    assert str(info.value) == (
        f"instrument {t.resource}: connection lost during ':TRAC:DATA? S11': "
        "the instrument closed the connection"
    )
    assert not t.is_open
    with pytest.raises(ConnectionLost, match="not connected"):
        t.query("*IDN?")


def test_writing_to_a_vanished_peer_is_connection_lost(peer_factory) -> None:
    def script(line: bytes, conn: socket.socket) -> None:
        if line == b"BYE":
            conn.close()
            raise OSError("peer hangs up")

    t = transport(peer_factory(script))
    t.write("BYE")
    with pytest.raises(ConnectionLost) as info:
        for _ in range(20):  # the first writes may still be accepted by the kernel
            time.sleep(0.02)
            t.write("X")
    assert str(info.value) == (
        f"instrument {t.resource}: connection lost during 'X': the instrument closed the connection"
    )


def test_overlong_line_is_refused(peer_factory, monkeypatch: pytest.MonkeyPatch) -> None:
    import drivers.transport as module

    monkeypatch.setattr(module, "MAX_LINE", 1000)
    t = transport(peer_factory(lambda line, conn: conn.sendall(b"7" * 5000)))
    with pytest.raises(ReplyError, match=r"'A\?' reply is longer than 1000 bytes: starts b'7777"):
        t.query("A?")


# -- blocks ------------------------------------------------------------------------------
@pytest.mark.parametrize("count", [0, 1, 201, 20002])
def test_read_block_into_buffer(peer_factory, count: int) -> None:
    t = transport(peer_factory(echo_script))
    buf = bytearray(count * 8)
    t.write(f"BLK? {count}")
    view = t.read_block(f"BLK? {count}", count * 8, memoryview(buf))
    assert np.frombuffer(view, "<f8").tolist() == (np.arange(count) + 0.5).tolist()
    assert t.query("OK?") == "OK"  # the terminator was consumed


def test_block_with_newlines_inside_and_indefinite_form(peer_factory) -> None:
    payload = bytes([10] * 16)  # 0x0A bytes are data inside a block

    def script(line: bytes, conn: socket.socket) -> None:
        if line == b"DEF?":
            conn.sendall(b"#216" + payload + b"\n")
        elif line == b"IND?":
            conn.sendall(b"#0" + payload + b"\n")

    t = transport(peer_factory(script))
    t.write("DEF?")
    assert bytes(t.read_block("DEF?", 16)) == payload
    t.write("IND?")
    assert bytes(t.read_block("IND?", 16)) == payload


def block_script(reply: bytes) -> Reply:
    def script(line: bytes, conn: socket.socket) -> None:
        if line == b"T?":
            conn.sendall(reply)
        elif line.endswith(b"?"):
            conn.sendall(line[:-1] + b"\n")

    return script


GOOD = encode_block(np.arange(8.0), "real64", "big")  # 64-byte payload


@pytest.mark.parametrize(
    ("reply", "words"),
    [
        (
            b"garbage \x01\x02 here\n",
            "'T?' reply is not an IEEE 488.2 block: starts b'garbage \\x01\\x02 here\\n'",
        ),
        (b"\n", "'T?' reply is not an IEEE 488.2 block: starts b'\\n'"),
        (b"#x1234\n", "'T?' block header needs a digit after '#', got b'x': starts b'#x1234\\n'"),
        (b"#3a12\n", "'T?' block length field b'a12' is not 3 digits"),
        (b"#256" + bytes(56) + b"\n", "'T?' block holds 56 bytes, expected 64 (8 values)"),
        (b"#272" + bytes(72) + b"\n", "'T?' block holds 72 bytes, expected 64 (8 values)"),
        (
            GOOD + b"extra\n",
            "'T?' block payload is followed by b'e', expected the terminator b'\\n'",
        ),
    ],
)
def test_malformed_blocks_leave_the_link_in_step(peer_factory, reply: bytes, words: str) -> None:
    t = transport(peer_factory(block_script(reply)), timeout_s=0.5)
    t.write("T?")
    with pytest.raises(BlockError) as info:
        t.read_block("T?", 64, what="8 values")
    assert str(info.value) == f"instrument {t.resource}: {words}" or words in str(info.value)
    assert "\n" not in str(info.value)
    assert t.query("NEXT?") == "NEXT"


def test_truncated_block_then_silence(peer_factory) -> None:
    t = transport(peer_factory(block_script(GOOD[:40])), timeout_s=0.3)
    t.write("T?")
    with pytest.raises(BlockError) as info:
        t.read_block("T?", 64)
    assert "'T?' block truncated: 64 payload bytes announced, fewer arrived within 0.3 s" in str(
        info.value
    )
    assert t.query("NEXT?") == "NEXT"


def test_truncated_block_then_close(peer_factory) -> None:
    def script(line: bytes, conn: socket.socket) -> None:
        conn.sendall(GOOD[:40])
        conn.shutdown(socket.SHUT_RDWR)

    t = transport(peer_factory(script), timeout_s=2.0)
    t.write("T?")
    with pytest.raises(ConnectionLost) as info:
        t.read_block("T?", 64)
    assert str(info.value).endswith(
        "'T?' block truncated: the instrument closed the connection after 36 of 64 bytes"
    )


def test_absurd_block_length_is_not_read(peer_factory) -> None:
    t = transport(peer_factory(block_script(b"#9999999999\n")), timeout_s=0.3)
    t.write("T?")
    with pytest.raises(BlockError, match="block holds 999999999 bytes, expected 64"):
        t.read_block("T?", 64)
    assert t.query("NEXT?") == "NEXT"


def test_error_hierarchy() -> None:
    assert issubclass(BlockError, ReplyError)
    for cls in (ConnectError, ConnectionLost, InstrumentTimeout, ReplyError):
        assert issubclass(cls, SweepdError)


# -- serial over a pseudo-terminal -------------------------------------------------------
class PtyPeer:
    """The instrument side of a pseudo-terminal; the transport opens the slave end."""

    def __init__(self, script: Callable[[bytes, int], None]) -> None:
        import tty

        self.master, self.slave = os.openpty()
        tty.setraw(self.slave)
        self.resource = f"ASRL{os.ttyname(self.slave)}::INSTR"
        self.script = script
        self._stop = False
        self._thread = threading.Thread(target=self._serve, daemon=True)
        self._thread.start()

    def _serve(self) -> None:
        import select

        buf = b""
        while not self._stop:
            try:
                ready, _, _ = select.select([self.master], [], [], 0.05)
                if not ready:
                    continue
                chunk = os.read(self.master, 65536)
            except (OSError, ValueError):  # the test closed the instrument side
                return
            buf += chunk
            while b"\n" in buf:
                line, buf = buf.split(b"\n", 1)
                self.script(line, self.master)
                if self._stop:
                    return

    def close(self) -> None:
        self._stop = True
        self._thread.join(1.0)
        for fd in (self.master, self.slave):
            with contextlib.suppress(OSError):
                os.close(fd)


@pytest.fixture
def pty_factory():
    peers: list[PtyPeer] = []

    def make(script: Callable[[bytes, int], None]) -> PtyPeer:
        peer = PtyPeer(script)
        peers.append(peer)
        return peer

    yield make
    for peer in peers:
        peer.close()


def pty_echo(line: bytes, fd: int) -> None:
    if line.startswith(b"BLK? "):
        count = int(line.split()[1])
        values = np.arange(count, dtype=np.float64) - 0.25
        os.write(fd, encode_block(values, "real64", "big") + b"\r\n")
    elif line.endswith(b"?"):
        os.write(fd, line[:-1] + b"\r\n")


def test_serial_query_block_and_crlf(pty_factory) -> None:
    peer = pty_factory(pty_echo)
    t = Transport(peer.resource, read_termination="\r\n", timeout_s=1.0, serial={"baud_rate": 9600})
    t.open()
    try:
        assert t.query("*IDN?") == "*IDN"
        t.write("BLK? 40")
        payload = t.read_block("BLK? 40", 320)  # big-endian REAL,64 holds 0x0A and 0x0D bytes
        assert np.frombuffer(payload, ">f8").tolist() == (np.arange(40) - 0.25).tolist()
        assert t.query("AFTER?") == "AFTER"
    finally:
        t.close()


def test_serial_timeout_and_garbage(pty_factory) -> None:
    def script(line: bytes, fd: int) -> None:
        if line == b"T?":
            os.write(fd, b"noise\r\n")
        elif line == b"OK?":
            os.write(fd, b"OK\r\n")

    peer = pty_factory(script)
    t = Transport(peer.resource, read_termination="\r\n", timeout_s=0.3)
    t.open()
    try:
        with pytest.raises(
            InstrumentTimeout, match=r"no complete reply to 'SILENT\?' within 0.3 s"
        ):
            t.query("SILENT?")
        t.write("T?")
        with pytest.raises(
            BlockError, match=r"'T\?' reply is not an IEEE 488.2 block: starts b'noise\\r\\n'"
        ):
            t.read_block("T?", 16)
        assert t.query("OK?") == "OK"
    finally:
        t.close()


def test_a_resource_manager_closed_elsewhere_is_replaced(peer_factory) -> None:
    import pyvisa

    peer = peer_factory(echo_script)
    t = transport(peer)
    assert t.query("A?") == "A"
    t.close()
    pyvisa.ResourceManager("@py").close()  # other code in the process shares the manager
    t.open()
    assert t.query("B?") == "B"
    t.close()


def test_serial_port_vanishing_is_connection_lost(pty_factory) -> None:
    def script(line: bytes, fd: int) -> None:
        if line == b"BYE?":
            peer._stop = True
            os.close(fd)  # the instrument side goes away mid-query

    peer = pty_factory(script)
    t = Transport(peer.resource, read_termination="\r\n", timeout_s=2.0)
    t.open()
    try:
        started = time.monotonic()
        with pytest.raises(ConnectionLost) as info:
            t.query("BYE?")
        assert time.monotonic() - started < 2.5
        assert str(info.value).startswith(f"instrument {peer.resource}: ")
        assert "connection lost during 'BYE?'" in str(info.value)
        assert "\n" not in str(info.value)
    finally:
        t.close()
