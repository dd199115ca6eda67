"""The simulator's VXI-11 server against pyvisa-py's VXI-11 client and a raw RPC peer.

Outside reference: VXI-11 rev. 1.0 (VXIbus Consortium): core program 0x0607AF version 1,
procedures create_link 10, device_write 11, device_read 12, device_readstb 13,
device_clear 15, destroy_link 23; read reasons REQCNT 1, CHR 2, END 4; error 8 "operation
not supported". ONC RPC (RFC 5531): call/reply layout, record marking (last-fragment bit),
accept status PROG_UNAVAIL 1. The raw peer packs its own XDR with ``struct``.
"""

from __future__ import annotations

import socket
import struct

import numpy as np
import pytest

from drivers.errors import BlockError, ConnectError, ConnectionLost
from drivers.transport import Transport
from drivers.visaopen import resource_manager
from simulators.server import SimServer


@pytest.fixture
def sim():
    with SimServer(tcp_port=0, vxi11_port=0, time_scale=0.0, noise=False) as server:
        yield server


def _rpc(sock: socket.socket, xid: int, prog: int, proc: int, args: bytes) -> bytes:
    call = struct.pack(">IIIIIIIIII", xid, 0, 2, prog, 1, proc, 0, 0, 0, 0) + args
    sock.sendall(struct.pack(">I", 0x80000000 | len(call)) + call)
    mark = struct.unpack(">I", sock.recv(4, socket.MSG_WAITALL))[0]
    assert mark & 0x80000000  # one last fragment
    reply = sock.recv(mark & 0x7FFFFFFF, socket.MSG_WAITALL)
    assert struct.unpack_from(">II", reply) == (xid, 1)  # our xid, a REPLY
    return reply[8:]


def test_raw_rpc_peer(sim: SimServer) -> None:
    with socket.create_connection(("127.0.0.1", sim.vxi11.port), timeout=3) as sock:
        body = _rpc(sock, 1, 0x0607AF, 10, struct.pack(">iII", 7, 0, 0) +
                    struct.pack(">I", 5) + b"inst0\0\0\0")
        # reply body: reply_stat, verifier (flavor, length), accept_stat, then the results
        status = struct.unpack_from(">I", body, 12)[0]
        error, link, _abort_port, max_recv = struct.unpack_from(">iiII", body, 16)
        assert status == 0 and error == 0 and max_recv >= 1024
        data = b"*IDN?\n"
        body = _rpc(sock, 2, 0x0607AF, 11, struct.pack(">iIIiI", link, 1000, 0, 8, len(data))
                    + data + b"\0\0")
        assert struct.unpack_from(">iI", body, 16) == (0, len(data))
        body = _rpc(sock, 3, 0x0607AF, 12, struct.pack(">iIIIii", link, 10, 1000, 0, 0, 0))
        error, reason, length = struct.unpack_from(">iiI", body, 16)
        assert (error, reason, length) == (0, 1, 10)  # REQCNT: 10 bytes asked, 10 given
        body = _rpc(sock, 4, 0x0607AF, 12, struct.pack(">iIIIii", link, 4096, 1000, 0, 0, 0))
        error, reason, length = struct.unpack_from(">iiI", body, 16)
        assert error == 0 and reason & 4 and body[28:28 + length].endswith(b"1.0\n")  # END
        body = _rpc(sock, 5, 0x0607AF, 22, struct.pack(">i", link))  # device_docmd
        assert struct.unpack_from(">i", body, 16)[0] == 8  # operation not supported
        body = _rpc(sock, 6, 0x0607B0, 1, struct.pack(">i", link))  # not the core program
        assert struct.unpack_from(">I", body, 12)[0] == 1  # PROG_UNAVAIL
        body = _rpc(sock, 7, 0x0607AF, 23, struct.pack(">i", link))
        assert struct.unpack_from(">i", body, 16)[0] == 0


def test_pyvisa_py_client_reads_the_same_trace_as_the_raw_socket(sim: SimServer) -> None:
    rm = resource_manager()
    results = []
    for resource in (sim.vxi11_resource, sim.tcp_resource):
        inst = rm.open_resource(resource, read_termination="\n", write_termination="\n")
        try:
            inst.write(":FORM REAL,64;:SWE:POIN 2001;:INIT;*WAI")
            results.append(inst.query_binary_values(":TRAC? S11", datatype="d",
                                                    container=np.array))
            inst.clear()
            inst.write("NOT:A:COMMAND")
            assert inst.query("*OPC?") == "1"
            if resource == sim.vxi11_resource:
                assert inst.read_stb() & 0x04  # SCPI-1999: error/event queue not empty
        finally:
            inst.close()
    np.testing.assert_array_equal(results[0], results[1])


def test_transport_over_vxi11_recovers_from_wire_faults(sim: SimServer) -> None:
    t = Transport(sim.vxi11_resource, timeout_s=0.5)
    t.open()
    try:
        assert t.query("*IDN?").startswith("sweepd-sim")
        sim.faults.arm("garbage", on="reply")
        t.write("*IDN?")
        with pytest.raises(BlockError):
            t.read_block("*IDN?", 16)
        assert t.query("*IDN?").startswith("sweepd-sim")
        sim.faults.arm("drop", on="reply")
        with pytest.raises(ConnectionLost):
            t.query("*IDN?")
        t.open()
        assert t.query("*IDN?").startswith("sweepd-sim")
        assert {f["endpoint"] for f in sim.faults.fired} == {"vxi11"}
        with pytest.raises(ConnectError, match="cannot open"):
            Transport(sim.vxi11_resource, timeout_s=0.5).open()  # one link at a time
    finally:
        t.close()
