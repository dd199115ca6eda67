"""Faults injected at the wire: what a client actually sees on the socket and the pty."""

from __future__ import annotations

import os
import select
import socket
import time

import numpy as np
import pytest
from test_sim_support import RawClient, wait_for

from simulators.errors import SimError
from simulators.server import SimServer

POINTS = 101


@pytest.fixture
def sim():
    with SimServer(serial=True) as server:
        yield server


def ready(client: RawClient) -> None:
    client.write(f":SWE:POIN {POINTS};:FORM REAL,64")
    assert client.query(":INIT;*OPC?") == "1"


def test_drop_closes_the_connection_instead_of_replying(sim):
    with RawClient(sim.tcp_resource) as c:
        ready(c)
        sim.faults.arm("drop")
        c.write(":TRAC? S11")
        assert c.sock.recv(100) == b""
    assert wait_for(lambda: not sim.tcp._session_thread.is_alive())
    with RawClient(sim.tcp_resource) as c:  # the next client is served normally
        ready(c)
        c.write(":TRAC? S11")
        assert len(c.read_block()) == POINTS * 16
    assert sim.faults.describe()["fired"][0]["kind"] == "drop"


def test_stall_delays_the_reply(sim):
    with RawClient(sim.tcp_resource) as c:
        ready(c)
        sim.faults.arm("stall", seconds=0.3)
        t0 = time.monotonic()
        c.write(":TRAC? S11")
        assert c.expect_silence(0.2) == b""
        c.buf = b""
        payload = c.read_block()
        assert time.monotonic() - t0 >= 0.3 and len(payload) == POINTS * 16


def test_garbage_replaces_the_reply(sim):
    with RawClient(sim.tcp_resource) as c:
        ready(c)
        sim.faults.arm("garbage", nbytes=40)
        c.write(":TRAC? S11")
        line = c.read_exact(41)
        assert line.endswith(b"\n") and b"\n" not in line[:-1] and not line.startswith(b"#6")
        assert c.query("*IDN?").startswith("sweepd-sim")


@pytest.mark.parametrize("then", ["close", "stall"])
def test_truncate_sends_part_of_the_block(sim, then):
    with RawClient(sim.tcp_resource) as c:
        ready(c)
        sim.faults.arm("truncate", fraction=0.25, then=then)
        c.write(":TRAC? S11")
        full = 6 + POINTS * 16 + 1
        if then == "close":
            got = b""
            while chunk := c.sock.recv(65536):
                got += chunk
        else:
            got = c.expect_silence(0.3)
        assert got.startswith(b"#41616") and len(got) == int(full * 0.25)


def test_wrong_count_is_a_well_formed_short_block(sim):
    with RawClient(sim.tcp_resource) as c:
        ready(c)
        sim.faults.arm("wrong_count")
        c.write(":TRAC? S11")
        assert len(c.read_block()) == (POINTS - 1) * 16
        c.write(":TRAC? S11")
        assert len(c.read_block()) == POINTS * 16  # one-shot
        sim.faults.arm("wrong_count")
        c.write(":FORM ASC")
        assert len(c.query(":TRAC? S21").split(",")) == 2 * (POINTS - 1)


def test_error_goes_into_the_queue_at_the_next_sweep(sim):
    with RawClient(sim.tcp_resource) as c:
        sim.faults.arm("error", code=-321, text="Out of memory")
        assert c.errors() == []
        ready(c)
        assert c.query(":SYST:ERR?") == '-321,"Out of memory"'
        sim.faults.arm("error", on="now")
        assert c.errors() == [-310]


def test_reboot_forgets_settings_and_refuses_connections(sim):
    with RawClient(sim.tcp_resource) as c:
        c.write(":FREQ:STAR 1e9;:SWE:POIN 11")
        assert c.query("*OPC?") == "1"
        sim.faults.arm("reboot", down_s=0.5)
        c.write(":INIT")
        assert c.sock.recv(100) == b""
    port = sim.tcp.port
    assert wait_for(lambda: sim.tcp._listener is None, 1.0)
    with pytest.raises(ConnectionRefusedError):
        socket.create_connection(("127.0.0.1", port), timeout=1).close()
    assert wait_for(lambda: sim.tcp._listener is not None, 10.0)  # back after down_s
    with RawClient(sim.tcp_resource) as c:
        assert c.query(":FREQ:STAR?;:SWE:POIN?;*ESR?") == "10000000;201;128"


def test_count_and_on_reply(sim):
    with RawClient(sim.tcp_resource) as c:
        sim.faults.arm("garbage", count=2, on="reply", nbytes=8)
        assert len(c.read_exact(0)) == 0
        for _ in range(2):
            c.write("*IDN?")
            assert len(c.read_line()) == 8
        assert c.query("*IDN?").startswith("sweepd-sim")


def test_schedule_every_nth_sweep(sim):
    sim.faults.schedule(every=3, kind="wrong_count")
    lengths = []
    with RawClient(sim.tcp_resource) as c:
        c.write(f":SWE:POIN {POINTS};:FORM REAL,64")
        for _ in range(7):
            assert c.query(":INIT;*OPC?") == "1"
            c.write(":TRAC? S11")
            lengths.append(len(c.read_block()) // 16)
    assert lengths == [POINTS, POINTS, POINTS - 1, POINTS, POINTS, POINTS - 1, POINTS]


def test_schedule_list_of_sweep_indices(sim):
    sim.faults.schedule(at=[(2, "error", {"code": -330, "text": "Self-test failed"}),
                            (3, "wrong_count")])
    with RawClient(sim.tcp_resource) as c:
        ready(c)
        assert c.errors() == []
        ready(c)
        assert c.errors() == [-330]
        ready(c)
        c.write(":TRAC? S11")
        assert len(c.read_block()) == (POINTS - 1) * 16


def test_endpoint_filter_and_serial_drop(sim):
    sim.faults.arm("drop", endpoint="serial", on="reply")
    with RawClient(sim.tcp_resource) as c:
        assert c.query("*IDN?").startswith("sweepd-sim")  # not for TCP
    fd = os.open(sim.serial.device, os.O_RDWR | os.O_NOCTTY)
    try:
        os.write(fd, b"*IDN?\n")
        assert select.select([fd], [], [], 0.3)[0] == []  # the reply is lost
        os.write(fd, b"*TST?\n")
        assert select.select([fd], [], [], 2.0)[0] == [fd]
        assert os.read(fd, 10) == b"0\n"
    finally:
        os.close(fd)


def test_bad_fault_descriptions_are_one_line_errors(sim):
    with pytest.raises(SimError, match="unknown kind 'melt'; allowed: drop"):
        sim.faults.arm("melt")
    with pytest.raises(SimError, match="fault stall: unknown option 'secs'"):
        sim.faults.arm("stall", secs=2)
    with pytest.raises(SimError, match="fraction must be in"):
        sim.faults.arm("truncate", fraction=2)
    with pytest.raises(SimError, match="acts on a reply"):
        sim.faults.arm("drop", on="sweep")
    with pytest.raises(SimError, match="bad 'at' entry"):
        sim.faults.schedule(at=["x"])


def test_faults_do_not_lose_data_already_captured(sim):
    # after a dropped reply the same sweep can be read again on a new connection
    with RawClient(sim.tcp_resource) as c:
        ready(c)
        sim.faults.arm("drop")
        c.write(":TRAC? S11")
        assert c.sock.recv(10) == b""
    assert wait_for(lambda: not sim.tcp._session_thread.is_alive())
    with RawClient(sim.tcp_resource) as c:
        c.write(":TRAC? S11")
        values = np.frombuffer(c.read_block(), ">f8")
        assert values.size == 2 * POINTS


@pytest.mark.long
def test_fault_storm_leaves_the_simulator_serving():
    import random

    rng = random.Random(5)
    kinds = [("drop", {}), ("stall", {"seconds": 0.05}), ("garbage", {}),
             ("truncate", {"then": "close"}), ("wrong_count", {}), ("error", {}),
             ("reboot", {"down_s": 0.05})]
    with SimServer() as sim:
        for _ in range(300):
            kind, opts = rng.choice(kinds)
            sim.faults.arm(kind, **opts)
            try:
                with RawClient(sim.tcp_resource, timeout_s=1.0) as c:
                    c.write(f":SWE:POIN {POINTS};:FORM REAL,64;:INIT;:TRAC? S11")
                    c.expect_silence(0.05)
            except OSError:  # refused while rebooting: wait until it listens again
                assert wait_for(lambda: sim.tcp._listener is not None, 10.0)
            wait_for(lambda: not (sim.tcp._session_thread and sim.tcp._session_thread.is_alive()))
        sim.faults.clear()
        assert wait_for(lambda: sim.tcp._listener is not None, 10.0)
        with RawClient(sim.tcp_resource) as c:
            assert c.query("*IDN?").startswith("sweepd-sim")
