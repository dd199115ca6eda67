"""The pseudo-terminal endpoint (os-level serial reads, pyserial) and both endpoints through
pyvisa-py, the transports a bench instrument is reached with."""

from __future__ import annotations

import os
import select
import time

import numpy as np
import pytest
import serial
from test_sim_support import wait_for

from simulators.server import SimServer


@pytest.fixture
def sim():
    with SimServer(serial=True) as server:
        yield server


def read_until(fd: int, n: int, timeout_s: float = 3.0) -> bytes:
    out = b""
    end = time.monotonic() + timeout_s
    while len(out) < n and time.monotonic() < end:
        ready, _, _ = select.select([fd], [], [], 0.1)
        if ready:
            out += os.read(fd, n - len(out))
    return out


def test_serial_resource_is_a_pty(sim):
    assert sim.serial_resource == f"ASRL{sim.serial.device}::INSTR"
    assert sim.serial.device.startswith("/dev/pts/")


def test_os_level_query_and_block(sim):
    fd = os.open(sim.serial.device, os.O_RDWR | os.O_NOCTTY)
    try:
        os.write(fd, b"*IDN?\n")
        assert read_until(fd, 38) == b"sweepd-sim,generic-2port,SIM0001,1.0\n"
        os.write(fd, b":SWE:POIN 1001;:FORM REAL,64;:FORM:BORD SWAP;:INIT;*OPC?\n")
        assert read_until(fd, 2) == b"1\n"
        os.write(fd, b":TRAC? S11\n")
        data = read_until(fd, 7 + 16016 + 1)
        assert data[:7] == b"#516016" and data[-1:] == b"\n"
        values = np.frombuffer(data[7:-1], dtype="<f8")
        raw = sim.bench.sweep(np.linspace(10e6, 6e9, 1001))[:, 0, 0]
        assert np.array_equal(values[0::2] + 1j * values[1::2], raw)
    finally:
        os.close(fd)


def test_pty_survives_reconnects_and_keeps_unread_bytes(sim):
    with serial.Serial(sim.serial.device, timeout=2) as port:
        port.write(b"*IDN?\n")
        assert port.readline().startswith(b"sweepd-sim")
        port.write(b"*TST?\n")  # leave the reply unread, as a crashed client would
        assert wait_for(lambda: port.in_waiting >= 2, 10.0)  # the reply is in the line
    fd = os.open(sim.serial.device, os.O_RDWR | os.O_NOCTTY)  # no flush on open
    try:
        assert read_until(fd, 2) == b"0\n"  # the stale reply waits in the line
    finally:
        os.close(fd)
    with serial.Serial(sim.serial.device, timeout=2) as port:
        port.write(b"*IDN?\n")
        assert port.readline().startswith(b"sweepd-sim")


@pytest.mark.parametrize("personality", ["generic", "tabletop"])
def test_pyvisa_py_over_both_endpoints(personality):
    import pyvisa

    term = "\n" if personality == "generic" else "\r\n"
    with SimServer(personality=personality, serial=True) as sim:
        # pyvisa hands every caller the same manager: close only our instruments.
        rm = pyvisa.ResourceManager("@py")
        for resource in sim.resources():
            inst = rm.open_resource(resource, read_termination=term, write_termination="\n",
                                    timeout=3000)
            try:
                assert inst.query("*IDN?").startswith("sweepd-sim")
                if personality == "generic":
                    inst.write(":SWE:POIN 401;:FORM REAL,32;:FORM:BORD NORM;:INIT")
                    assert inst.query("*OPC?") == "1"
                    values = inst.query_binary_values(":TRAC? S11", datatype="f",
                                                      is_big_endian=True,
                                                      container=np.array)
                    assert values.size == 802
                else:
                    inst.write("STIM:COUN 5;:MEAS:RUN")
                    assert inst.query("*OPC?") == "1"
                    assert len(inst.query("MEAS:VAL? REFL1").split(",")) == 10
            finally:
                inst.close()
