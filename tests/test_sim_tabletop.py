"""The tabletop personality (invented command set): MHz, dB/deg pairs, CR LF, settle times."""

from __future__ import annotations

import numpy as np
import pytest
from test_sim_support import RawClient, wait_for

from simulators.server import SimServer
from simulators.tabletop import nearest_width


@pytest.fixture
def sim():
    with SimServer(personality="tabletop", time_scale=0.0) as server:
        yield server


@pytest.fixture
def client(sim):
    with RawClient(sim.tcp_resource, terminator=b"\r\n") as c:
        yield c


def errors(client):
    codes = []
    while (code := int(client.query("ERR:NEXT?").split(",")[0])) != 0:
        codes.append(code)
    return codes


def test_identity_and_line_ending(client):
    client.write("*IDN?")
    assert client.read_exact(39) == b"sweepd-sim,tabletop-2port,SIM0002,2.3\r\n"


def test_settings_in_mhz(client):
    client.write("STIM:LOW 2400;HIGH 2500;COUN 11;:STIM:LEV -10")  # SCPI path rules apply
    assert client.query("STIMulus:LOW?;HIGH?;COUNt?;LEVel?") == "2400;2500;11;-10"
    assert errors(client) == []


def test_receiver_width_rounds_to_a_1_2_5_step(client):
    # common practice: IF bandwidths come in a 1-2-5 series
    assert nearest_width(1500) == 2000 and nearest_width(700) == 500 and nearest_width(3) == 2
    client.write("REC:WIDT 1500;AVER 4")
    assert client.query("REC:WIDT?;AVER?") == "2000;4"


def test_values_are_db_deg_pairs_of_the_raw_data(sim, client):
    client.write("STIM:LOW 2400;HIGH 2500;COUN 21;:MEAS:RUN")
    assert client.query("*OPC?") == "1"
    axis = np.array([float(v) for v in client.query("MEAS:AXIS?").split(",")])
    assert np.allclose(axis, np.linspace(2400, 2500, 21), atol=1e-9)
    raw = sim.bench.sweep(axis * 1e6)
    for name, (r, c) in {"REFL1": (0, 0), "TRANS21": (1, 0), "REFL2": (1, 1)}.items():
        pairs = np.array([float(v) for v in client.query(f"MEAS:VAL? {name}").split(",")])
        assert pairs.size == 42
        # dB = 20·log10|x| and the angle in degrees, six decimals
        assert np.allclose(pairs[0::2], 20 * np.log10(np.abs(raw[:, r, c])), atol=1e-6)
        assert np.allclose(pairs[1::2], np.degrees(np.angle(raw[:, r, c])), atol=1e-6)


def test_settle_time_makes_opc_matter(sim, client):
    sim.time_scale = 20.0  # 0.5 s settle: queried at once, a setting is not settled yet
    client.write("STIM:COUN 11")
    assert client.query("STIM:COUN?") == "201"  # not settled yet
    assert client.query("*OPC?") == "1"
    assert client.query("STIM:COUN?") == "11"
    client.write("STIM:COUN 21;:MEAS:RUN")  # runs with the old count
    assert client.query("*OPC?") == "1"
    assert len(client.query("MEAS:AXIS?").split(",")) == 11
    client.write("SWIT:STAN SHORT")
    assert client.query("SWIT:STAN?") == "DUT"
    assert wait_for(lambda: client.query("SWIT:STAN?") == "SHORT", 10.0)
    assert sim.bench.connected == "short"


def test_standard_switch(sim, client):
    for word, name in (("OPEN", "open"), ("LOAD", "load"), ("THRU", "thru"), ("DUT", "device")):
        client.write(f"SWITch:STANdard {word}")
        assert client.query("SWIT:STAN?") == word
        assert sim.bench.connected == name


def test_errors_of_its_own(client):
    client.write(":SENS:FREQ:STAR 1e9")  # the generic tree does not exist here
    client.write("*ESR?")
    client.write("STIM:LOW 90000")
    client.write("MEAS:VAL? REFL1")
    client.write("STIM:LOW 3000;HIGH 2000;:MEAS:RUN")
    assert errors(client) == [-113, -113, -222, -230, -221]
    client.write("BOGUS")
    client.write("ERR:CLE")
    assert client.query("ERR:NEXT?") == '0,"No error"'
