"""The slotted personality (invented command tree): slots, busy polling, big-endian blocks,
CR LF replies, unit-suffixed read-backs, a preset that keeps the unit busy."""

from __future__ import annotations

import time

import numpy as np
import pytest
from test_sim_support import RawClient

from simulators.server import SimServer


@pytest.fixture
def sim():
    with SimServer(personality="slotted", time_scale=0.0, noise=False) as server:
        yield server


@pytest.fixture
def client(sim):
    with RawClient(sim.tcp_resource, terminator=b"\r\n") as c:
        yield c


def errors(client) -> list[int]:
    codes = []
    while (code := int(client.query("STAT:ERR?").split(",")[0])) != 0:
        codes.append(code)
    return codes


def block(client, command: str) -> bytes:
    client.write(command)
    head = client.read_exact(2)
    assert head[:1] == b"#"
    length = int(client.read_exact(int(head[1:2])))
    payload = client.read_exact(length)
    assert client.read_exact(2) == b"\r\n"  # CR LF after the block
    return payload


def test_identity_is_its_own_quoted_query_and_idn_is_unknown(client) -> None:
    client.write("UNIT:IDEN?")
    assert client.read_exact(40) == b'"sweepd-sim/slotted-2port/SIM0003/0.9"\r\n'
    client.write("*IDN?")
    assert errors(client) == [-113]


def test_settings_read_back_with_unit_suffixes(client) -> None:
    client.write("CHAN:FST 2400000000;:CHAN:FSTop 2.5e9;:CHAN:NPO 11;:CHAN:LEV -10;:CHAN:RBW 1000")
    assert client.query("CHAN:FST?") == "2400000.000 KHZ"
    assert client.query("CHAN:FSTOP?") == "2500000.000 KHZ"
    assert client.query("CHAN:NPO?") == "      11"
    assert client.query("CHAN:LEV?") == "-10.00 DBM"
    assert client.query("CHAN:RBW?") == "1000 HZ"
    assert errors(client) == []


def test_data_only_from_a_defined_and_selected_slot(sim, client) -> None:
    client.write("CHAN:FST 2.4e9;:CHAN:FSTop 2.5e9;:CHAN:NPO 5;:FORM:DATA REAL32")
    client.write("ACQ:SING")
    client.write("FETC:SLOT? 2")  # slot 2 not defined
    client.write("SLOT2:DEF S21;:SLOT:SEL 1")  # slot 1 not defined: -221
    assert errors(client) == [-221, -221]
    client.write("SLOT1:DEF S11;:SLOT:SEL 2")
    client.write("FETC:SLOT? 1")  # defined but slot 2 is the selected one
    assert errors(client) == [-221]
    values = np.frombuffer(block(client, "FETC:SLOT? 2"), dtype=">f4")
    truth = sim.bench.sweep(np.linspace(2.4e9, 2.5e9, 5), 0.0, 1e3, 1)[:, 1, 0]
    np.testing.assert_allclose(values[0::2] + 1j * values[1::2], truth, rtol=1e-6)
    axis = np.frombuffer(block(client, "FETC:AXIS?"), dtype=">f8")
    np.testing.assert_allclose(axis, np.linspace(2.4e6, 2.5e6, 5))  # kHz
    client.write("SLOT2:DEL")
    assert client.query("SLOT2:DEF?") == "NONE" and client.query("SLOT:SEL?") == "0"


def test_busy_reads_one_while_sweeping_and_esr_bit_0_after_opc() -> None:
    with SimServer(personality="slotted", time_scale=1.0) as sim, \
            RawClient(sim.tcp_resource, terminator=b"\r\n") as client:
        client.write("CHAN:NPO 201;:CHAN:RBW 1000")  # about 0.21 s per sweep
        # the simulator's own timing model: 201 x (1/1 kHz + 20 us) + 2 ms = 207.02 ms
        assert float(client.query("ACQ:DUR?")) == pytest.approx(207.02, abs=0.01)
        client.query("*ESR?")  # clear the register
        client.write("ACQ:SING;*OPC")
        assert client.query("ACQ:BUSY?") == "1"
        assert int(client.query("*ESR?")) & 1 == 0
        time.sleep(0.3)
        assert client.query("ACQ:BUSY?") == "0"
        assert int(client.query("*ESR?")) & 1 == 1


def test_a_preset_keeps_the_unit_busy_and_forgets_the_slots() -> None:
    with SimServer(personality="slotted", time_scale=1.0) as sim, \
            RawClient(sim.tcp_resource, terminator=b"\r\n") as client:
        client.write("SLOT1:DEF S11")
        client.write("UNIT:PRES;:CHAN:NPO 11")  # within the 40 ms: refused
        time.sleep(0.06)
        assert errors(client) == [-300]
        assert client.query("SLOT1:DEF?") == "NONE"
        assert client.query("CHAN:NPO?") == "     201"  # the preset's value
