"""The simulator's HiSLIP server against pyvisa-py's HiSLIP client and a raw-socket peer.

Outside reference: IVI-6.1 (HiSLIP 2.0, IVI Foundation): the 16-byte header ("HS", type,
control code, 32-bit parameter, 64-bit payload length, network order), the message type
codes (Initialize 0, InitializeResponse 1, FatalError 2, Error 3, AsyncLock 4/Response 5,
Data 6, DataEND 7, DeviceClearComplete 8/Acknowledge 9, AsyncMaxMsgSize 15/Response 16,
AsyncInitialize 17/Response 18, AsyncDeviceClear 19, AsyncStatusQuery 21/Response 22,
AsyncDeviceClearAcknowledge 23, AsyncLockInfo 24/Response 25) and the fatal error codes
(1 poorly formed header, 4 too many clients). The raw peer here packs headers with its own
``struct`` call rather than the simulator's helpers. pyvisa-py's client is the second,
independent peer.
"""

from __future__ import annotations

import socket
import struct
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from drivers.errors import BlockError, ConnectError, ConnectionLost, InstrumentTimeout
from drivers.transport import Transport
from drivers.visaopen import resource_manager
from simulators.server import SimServer

ROOT = Path(__file__).resolve().parents[1]
HEADER = "!2sBBIQ"  # IVI-6.1 message header


@pytest.fixture
def sim():
    with SimServer(tcp_port=0, hislip_port=0, time_scale=0.0, noise=False) as server:
        yield server


def _msg(kind: int, control: int = 0, parameter: int = 0, payload: bytes = b"") -> bytes:
    return struct.pack(HEADER, b"HS", kind, control, parameter, len(payload)) + payload


def _recv(sock: socket.socket) -> tuple[int, int, int, bytes]:
    head = b""
    while len(head) < 16:
        chunk = sock.recv(16 - len(head))
        assert chunk, "closed"
        head += chunk
    prologue, kind, control, parameter, length = struct.unpack(HEADER, head)
    assert prologue == b"HS"
    payload = b""
    while len(payload) < length:
        payload += sock.recv(length - len(payload))
    return kind, control, parameter, payload


def _open_raw(sim: SimServer) -> tuple[socket.socket, socket.socket]:
    port = sim.hislip.port
    sync = socket.create_connection(("127.0.0.1", port), timeout=3)
    sync.sendall(_msg(0, 0, (1 << 24) | int.from_bytes(b"zz", "big"), b"hislip0"))
    kind, control, parameter, _ = _recv(sync)
    assert (kind, control) == (1, 0)  # InitializeResponse, synchronized mode
    assert parameter >> 16 == 0x0100  # protocol version 1.0
    session_id = parameter & 0xFFFF
    asyn = socket.create_connection(("127.0.0.1", port), timeout=3)
    asyn.sendall(_msg(17, 0, session_id))
    assert _recv(asyn)[0] == 18  # AsyncInitializeResponse
    return sync, asyn


def _query(sync: socket.socket, text: bytes, message_id: int) -> tuple[int, bytes]:
    sync.sendall(_msg(7, 0, message_id, text))
    kind, _, parameter, payload = _recv(sync)
    assert kind == 7
    return parameter, payload


def test_handshake_data_and_message_ids_on_a_raw_peer(sim: SimServer) -> None:
    sync, asyn = _open_raw(sim)
    with sync, asyn:
        parameter, reply = _query(sync, b"*IDN?", 0xFFFFFF00)  # no LF: DataEND ends it
        assert reply == b"sweepd-sim,generic-2port,SIM0001,1.0\n"
        assert parameter == 0xFFFFFF00  # the reply carries the request's message id
        asyn.sendall(_msg(15, 0, 0, struct.pack("!Q", 64)))  # AsyncMaxMsgSize: 64 bytes
        kind, _, _, payload = _recv(asyn)
        assert kind == 16 and struct.unpack("!Q", payload)[0] >= 1024
        sync.sendall(_msg(7, 0, 0xFFFFFF02, b"*IDN?\n"))
        parts = []
        while True:  # 38 bytes of reply in Data messages of at most 64 - 16 bytes each
            kind, _, parameter, payload = _recv(sync)
            assert parameter == 0xFFFFFF02 and len(payload) <= 48
            parts.append(payload)
            if kind == 7:
                break
        assert b"".join(parts).startswith(b"sweepd-sim")


def test_device_clear_drops_a_half_sent_message(sim: SimServer) -> None:
    sync, asyn = _open_raw(sim)
    with sync, asyn:
        sync.sendall(_msg(6, 0, 0xFFFFFF00, b":SYST:ERR"))  # Data, no DataEND yet
        asyn.sendall(_msg(19))  # AsyncDeviceClear
        assert _recv(asyn)[0] == 23  # AsyncDeviceClearAcknowledge
        sync.sendall(_msg(8))  # DeviceClearComplete
        assert _recv(sync)[0] == 9  # DeviceClearAcknowledge
        assert _query(sync, b"*IDN?", 0xFFFFFF00)[1].startswith(b"sweepd-sim")
        assert _query(sync, b":SYST:ERR?", 0xFFFFFF02)[1] == b'0,"No error"\n'


def test_lock_status_and_unknown_messages_on_the_async_channel(sim: SimServer) -> None:
    sync, asyn = _open_raw(sim)
    with sync, asyn:
        asyn.sendall(_msg(24))  # AsyncLockInfo
        assert _recv(asyn)[:2] == (25, 0)
        asyn.sendall(_msg(4, 1, 1000))  # AsyncLock request, 1 s
        assert _recv(asyn)[:2] == (5, 1)  # success
        asyn.sendall(_msg(24))
        assert _recv(asyn)[:3] == (25, 1, 1)
        asyn.sendall(_msg(4, 0, 0))  # release
        assert _recv(asyn)[:2] == (5, 1)
        asyn.sendall(_msg(4, 0, 0))  # release without a lock: error
        assert _recv(asyn)[:2] == (5, 3)
        sync.sendall(_msg(7, 0, 0xFFFFFF00, b"NOT:A:COMMAND"))  # queues -113, no reply
        assert _query(sync, b"*OPC?", 0xFFFFFF02)[1] == b"1\n"  # processed in order
        asyn.sendall(_msg(21, 0, 0xFFFFFF00))  # AsyncStatusQuery
        kind, stb, _, _ = _recv(asyn)
        assert kind == 22 and stb & 0x04  # SCPI-1999: bit 2, error/event queue not empty
        asyn.sendall(_msg(99))
        kind, control, _, text = _recv(asyn)
        assert (kind, control) == (3, 1) and b"99" in text  # Error: unrecognized type


def test_a_second_client_and_a_bad_header_get_fatal_errors(sim: SimServer) -> None:
    sync, asyn = _open_raw(sim)
    with sync, asyn:
        other = socket.create_connection(("127.0.0.1", sim.hislip.port), timeout=3)
        with other:
            other.sendall(_msg(0, 0, 1 << 24, b"hislip0"))
            kind, control, _, text = _recv(other)
            assert (kind, control) == (2, 4) and b"another client" in text
        sync.sendall(b"XX" + bytes(14))
        kind, control, _, _ = _recv(sync)
        assert (kind, control) == (2, 1)  # poorly formed message header
        assert sync.recv(16) == b""  # and the session is closed
    wrong = socket.create_connection(("127.0.0.1", sim.hislip.port), timeout=3)
    with wrong:
        wrong.sendall(_msg(0, 0, 1 << 24, b"hislip7"))
        kind, _, _, text = _recv(wrong)
        assert kind == 2 and b"sub-address" in text


def test_pyvisa_py_client_reads_the_same_trace_as_the_raw_socket(sim: SimServer) -> None:
    from pyvisa import constants

    rm = resource_manager()
    results = []
    for resource in (sim.hislip_resource, sim.tcp_resource):
        inst = rm.open_resource(resource, read_termination="\n", write_termination="\n")
        try:
            if resource == sim.hislip_resource:  # small messages: the reply is split
                inst.set_visa_attribute(constants.ResourceAttribute.tcpip_hislip_max_message_kb,
                                        4)
            inst.write(":FORM REAL,64;:SWE:POIN 2001;:INIT;*WAI")
            results.append(inst.query_binary_values(":TRAC? S11", datatype="d",
                                                    container=np.array))
            inst.clear()  # device clear: AsyncDeviceClear + DeviceClearComplete
            assert inst.query("*IDN?").startswith("sweepd-sim")
            if resource == sim.hislip_resource:
                assert inst.read_stb() == 0  # AsyncStatusQuery
        finally:
            inst.close()
    assert results[0].shape == (4002,)
    np.testing.assert_array_equal(results[0], results[1])


def test_transport_over_hislip_recovers_from_every_wire_fault(sim: SimServer) -> None:
    t = Transport(sim.hislip_resource, timeout_s=0.5)
    t.open()
    try:
        assert t.query("*IDN?").startswith("sweepd-sim")
        sim.faults.arm("stall", seconds=1.0, on="reply")
        with pytest.raises(InstrumentTimeout, match=r"no complete reply to '\*IDN\?'"):
            t.query("*IDN?")
        assert t.query("*IDN?").startswith("sweepd-sim")  # reconnected: no late reply
        sim.faults.arm("garbage", on="reply")
        t.write("*IDN?")
        with pytest.raises(BlockError, match=r"'\*IDN\?' (block header|reply is not)"):
            t.read_block("*IDN?", 16)
        assert t.query("*IDN?").startswith("sweepd-sim")
        for kind, options in (("drop", {}), ("truncate", {"then": "close"})):
            sim.faults.arm(kind, on="reply", **options)
            with pytest.raises(ConnectionLost, match="the instrument closed the connection"):
                t.query("*IDN?")
            t.open()
            assert t.query("*IDN?").startswith("sweepd-sim")
        assert {f["endpoint"] for f in sim.faults.fired} == {"hislip"}
    finally:
        t.close()


def test_busy_instrument_is_one_line(sim: SimServer) -> None:
    first = Transport(sim.hislip_resource, timeout_s=1.0)
    first.open()
    try:
        with pytest.raises(ConnectError) as info:
            Transport(sim.hislip_resource, timeout_s=1.0).open()
        assert "another client is connected" in str(info.value)
        assert "\n" not in str(info.value)
    finally:
        first.close()


@pytest.mark.parametrize(
    ("resource", "words"),
    [
        # nothing listens on port 1: pyvisa-py logs a traceback, we say one line
        ("TCPIP::127.0.0.1::hislip0,1::INSTR", "cannot open: Connection refused"),
        ("FOO::bar", "--resource: not a supported VISA resource string: 'FOO::bar'"),
        ("TCPIP::127.0.0.1::5025::SOCKET;*RST", "(must not contain ';')"),
    ],
)
def test_cli_bad_or_unreachable_resource_is_exactly_one_line(tmp_path: Path, resource: str,
                                                             words: str) -> None:
    """Issue regressions: a hislip resource printed a third-party traceback; an unknown
    one a pyvisa warning line before ours; ``--resource`` bypassed the plan's rules."""
    proc = subprocess.run(
        [sys.executable, "-m", "acquire.cli", "run", str(ROOT / "configs/plans/cable-line.yaml"),
         "--resource", resource, "--output", str(tmp_path)],
        capture_output=True, text=True, timeout=60, cwd=ROOT,
    )
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and words in proc.stderr, proc.stderr
    assert proc.stderr.startswith("sweepd: error: ")
