"""The simulator's SCPI front end over real TCP: parser rules (SCPI-1999 Vol. 1, IEEE Std
488.2), error codes, status registers, data formats and blocks, timing."""

from __future__ import annotations

import contextlib
import select
import socket
import time

import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st
from test_sim_support import RawClient, complex_from_ascii, wait_for

from simulators.scpi_errors import TEXT, Status
from simulators.scpi_parser import Interpreter
from simulators.server import SimServer


@pytest.fixture
def sim():
    with SimServer(personality="generic", time_scale=0.0, noise=False) as server:
        yield server


@pytest.fixture
def client(sim):
    with RawClient(sim.tcp_resource) as c:
        yield c


def test_identity_and_reset_defaults(client):
    # *RST: 10 MHz..6 GHz, 201 points, 0 dBm, 1 kHz, averaging off, ASCii, NORMal
    assert client.query("*IDN?") == "sweepd-sim,generic-2port,SIM0001,1.0"
    client.write("FREQ:STAR 1e9;:SWE:POIN 11;:FORM REAL,32;:FORM:BORD SWAP;*RST")
    assert client.query(":FREQ:STAR?;STOP?;:SWE:POIN?;:SOUR:POW?;:BAND?;:AVER?;:AVER:COUN?;"
                        ":FORM?;:FORM:BORD?;:INIT:CONT?") == \
        "10000000;6000000000;201;0;1000;0;1;ASC;NORM;0"


def test_long_short_and_case(client):
    client.write(":sense:frequency:start 1e9")
    client.write(":SENS:FREQ:STOP 2E9")
    client.write(":Sens:Freq:Cent 1.5e9")
    assert client.query(":SENSe:FREQuency:STARt?;STOP?;CENT?;SPAN?") == \
        "1000000000;2000000000;1500000000;1000000000"
    assert client.errors() == []


def test_only_exact_short_or_long_forms(client):
    # "Only the exact short or exact long form is accepted — FREQU is an error" (SCPI-1999)
    client.write(":SENS:FREQU:STAR 1e9")
    client.write(":SENS:FREQUENC:STAR 1e9")
    client.write(":SENS:FRE:STAR 1e9")
    assert client.errors() == [-113, -113, -113]
    assert client.query(":FREQ:STAR?") == "10000000"


def test_optional_nodes(client):
    client.write(":SENS:AVER ON")
    assert client.query(":SENS:AVER:STAT?") == "1"
    client.write("AVER:STAT OFF")
    assert client.query("AVER?") == "0"
    client.write(":SOUR:POW -5")
    assert client.query(":SOURce:POWer:LEVel:IMMediate:AMPLitude?") == "-5"
    client.write(":BWID 300")
    assert client.query(":SENS:BAND:RES?") == "300"
    assert client.errors() == []


def test_numeric_suffixes(client):
    client.write(":SENS1:FREQ:STAR 2e9")
    assert client.query(":SENSE1:FREQ:STAR?") == "2000000000"
    client.write(":SENS2:FREQ:STAR 3e9")  # one channel only
    assert client.errors() == [-114]
    client.write(":SYST1:ERR?")  # SYSTem takes no suffix
    assert client.errors() == [-113]


def test_semicolon_path_rules(client):
    # after ';' a header continues at the level of the previous unit's last node
    client.write(":SENS:FREQ:STAR 1e9;STOP 3e9")
    assert client.query(":FREQ:STAR?;STOP?") == "1000000000;3000000000"
    # SYST:ERR? leaves the path at SYSTem, so a second SYST:ERR? is SYST:SYST:ERR: −113
    client.write(":FREQU 1")
    assert client.query(":SYST:ERR?;SYST:ERR?") == '-113,"Undefined header;:FREQU"'
    assert client.errors() == [-113]
    # a leading colon restarts at the root; common commands do not move the path
    assert client.query(":FREQ:STAR 2e9;*ESE 0;STOP 4e9;:SWE:POIN?") == "201"
    assert client.query(":FREQ:STOP?") == "4000000000"
    assert client.errors() == []
    # the terminator resets the path
    client.write(":SENS:FREQ:STAR 1e9")
    client.write("STOP 2e9")
    assert client.errors() == [-113]


def test_several_queries_give_one_response(client):
    assert client.query("*IDN?;:SYST:VERS?;*TST?") == \
        "sweepd-sim,generic-2port,SIM0001,1.0;1999.0;0"


@pytest.mark.parametrize("message,code", [
    (":FREQ::STAR 1e9", -102),
    (":FREQ-STAR 1e9", -101),
    (":AVERAGESTATEXYZ ON", -112),
    (":FREQ:STAR 1e9,2e9", -108),
    (":FREQ:STAR", -109),
    (":FREQ:STAR 'abc'", -104),
    (":FREQ:STAR 1.2.3", -121),
    (":FREQ:STAR 1 PARSEC", -131),
    (":SWE:POIN 5 HZ", -138),
    (":FREQ:STAR 30e9", -222),
    (":SWE:POIN 0", -222),
    (":FORM FOO", -224),
    (":FORM REAL,16", -224),
    (":TRAC? S33", -224),
    (":ROUT:CLOS (@1,2)", -221),
    (":ROUT:CLOS (@9)", -222),
    ("*IDN", -113),
    (":SWE:TIME 1", -113),
    ("*FOO?", -113),
    (":FREQ:STAR 'abc", -151),
])
def test_error_codes(client, message, code):
    client.write(message)
    assert client.errors() == [code]


def test_error_text_names_the_header(client):
    client.write(":FREQ:STAR 30e9")
    assert client.query(":SYST:ERR?") == \
        '-222,"Data out of range;:FREQ:STAR 30e9; allowed 10000 to 20000000000"'
    assert client.query(":SYST:ERR?") == '0,"No error"'


def test_nrf_plus_keywords_and_units(client):
    client.write(":FREQ:STAR MIN;STOP MAX;:SWE:POIN DEF")
    assert client.query(":FREQ:STAR?;STOP?;:SWE:POIN?") == "10000;20000000000;201"
    assert client.query(":FREQ:STAR? MAX;:SWE:POIN? MIN") == "20000000000;1"
    client.write(":FREQ:STAR 2.4 GHZ;STOP 2500 MHZ;:BAND 1 KHZ")
    assert client.query(":FREQ:STAR?;STOP?;:BAND?") == "2400000000;2500000000;1000"
    client.write(":SWE:POIN 10.6;:SWE:POIN?")
    assert client.read_line() == "11"  # integers round
    client.write(":SWE:POIN #H1F")
    assert client.query(":SWE:POIN?") == "31"
    assert client.errors() == []


def test_frequency_coupling(client):
    client.write(":FREQ:STAR 1e9;STOP 2e9;STAR 3e9")
    assert client.query(":FREQ:STAR?;STOP?") == "3000000000;3000000000"
    client.write(":FREQ:CENT 1e9;SPAN 4e9")
    assert client.query(":FREQ:STAR?;STOP?") == "10000;1999990000"


def test_error_queue_overflow_and_clear():
    # full queue: newest entry replaced by −350 (SCPI-1999 Vol. 2 §21.8)
    status = Status(capacity=20)
    for _ in range(25):
        status.push(-113)
    codes = [status.pop()[0] for _ in range(21)]
    assert codes == [-113] * 19 + [-350, 0]


def test_error_queue_over_the_wire(client):
    for _ in range(25):
        client.write(":NOPE")
    assert client.query(":SYST:ERR:COUN?") == "20"
    assert client.errors() == [-113] * 19 + [-350]
    client.write(":NOPE;*RST")  # *RST keeps the queue, *CLS clears it
    assert client.query(":SYST:ERR:COUN?") == "1"
    client.write("*CLS")
    assert client.query(":SYST:ERR:COUN?") == "0"


def test_status_registers(client):
    # IEEE Std 488.2: PON at power-on; CME (bit 5) on a command error, EXE (bit 4) on
    # an execution error; *ESR? reads and clears; STB bit 2 = error queue not empty (SCPI);
    # ESB (bit 5) when ESR & ESE; MSS (bit 6) when STB & SRE
    assert client.query("*ESR?") == "128"
    assert client.query("*ESR?") == "0"
    client.write(":NOPE;:FREQ:STAR 99e9")
    assert client.query("*ESR?") == str(0x20 | 0x10)
    assert int(client.query("*STB?")) & 0x04
    client.write("*CLS;*ESE 32;*SRE 32;:NOPE")
    stb = int(client.query("*STB?"))
    assert stb & 0x20 and stb & 0x40
    assert client.query("*ESE?;*SRE?") == "32;32"
    client.write("*CLS;*OPC")
    assert int(client.query("*ESR?")) & 0x01


def test_stale_trace_sends_nothing_and_queues_230(client):
    client.write(":TRAC? S11")
    assert client.expect_silence() == b""
    assert client.errors() == [-230]
    assert client.query(":INIT;*OPC?") == "1"
    client.query(":TRAC? S11")
    client.write(":FREQ:STAR 1e9")  # a settings change makes the data stale again
    client.write(":TRAC? S11")
    assert client.expect_silence() == b""
    assert client.errors() == [-230]


def test_ascii_trace_is_the_bench_raw_data(sim, client):
    client.write(":FREQ:STAR 1e9;STOP 3e9;:SWE:POIN 51")
    assert client.query(":INIT;*OPC?") == "1"
    f = np.linspace(1e9, 3e9, 51)
    raw = sim.bench.sweep(f)
    for name, (r, c) in {"S11": (0, 0), "S21": (1, 0), "S12": (0, 1), "S22": (1, 1)}.items():
        values = complex_from_ascii(client.query(f":TRAC:DATA? {name}"))
        assert np.array_equal(values, raw[:, r, c])  # shortest round-trip text is exact


@pytest.mark.parametrize("width,order,dtype", [
    (64, "NORM", ">f8"), (64, "SWAP", "<f8"), (32, "NORM", ">f4"), (32, "SWAP", "<f4")])
def test_real_blocks(client, width, order, dtype):
    # IEEE Std 488.2 definite-length block; NORMal = big-endian, SWAPped = little-endian
    client.write(":SWE:POIN 101;:INIT")
    assert client.query("*OPC?") == "1"
    ascii_values = np.array([float(v) for v in client.query(":TRAC? S11").split(",")])
    client.write(f":FORM REAL,{width};:FORM:BORD {order}")
    assert client.query(":FORM?;:FORM:BORD?") == f"REAL,{width};{order}"
    client.write(":TRAC? S11")
    head = client.read_exact(2)
    digits = int(head[1:2])
    length = int(client.read_exact(digits))
    assert head[:1] == b"#" and length == 101 * 2 * width // 8 and digits == len(str(length))
    payload = client.read_exact(length)
    assert client.read_exact(1) == b"\n"
    values = np.frombuffer(payload, dtype=dtype)
    assert np.array_equal(values, ascii_values.astype(dtype))


def test_form_real_defaults_to_64(client):
    client.write(":FORM REAL")
    assert client.query(":FORM?") == "REAL,64"


def test_block_with_newlines_in_the_payload(client):
    # a payload byte 0x0A must not end the reply: read by length, not by line
    client.write(":SWE:POIN 2001;:FORM REAL,64;:INIT")
    assert client.query("*OPC?") == "1"
    client.write(":TRAC? S11")
    payload = client.read_block()
    assert len(payload) == 2001 * 16
    assert client.query("*IDN?").startswith("sweepd-sim")


def test_sweep_time_and_waiting(sim, client):
    # sweep time = points × (1/IFBW + 20 µs) + 2 ms (module docstring of simulators.instrument)
    client.write(":SWE:POIN 201;:BAND 1e3")
    assert float(client.query(":SWE:TIME?")) == pytest.approx(201 * (1e-3 + 20e-6) + 2e-3)
    client.write(":AVER ON;:AVER:COUN 4")
    assert float(client.query(":SWE:TIME?")) == pytest.approx(4 * 201 * (1e-3 + 20e-6) + 2e-3)
    client.write(":AVER OFF;:SWE:POIN 101;:BAND 1e6")
    sim.time_scale = 1.0
    client.write(":BAND 1e3")  # ≈ 0.105 s per sweep
    t0 = time.monotonic()
    client.write(":INIT;:TRAC? S11")
    assert client.expect_silence(0.05) == b""
    assert client.query("*OPC?") == "1"
    assert time.monotonic() - t0 > 0.09
    assert client.errors() == [-230]  # "sweep in progress"
    assert len(client.query(":TRAC? S11").split(",")) == 202
    client.write(":INIT;:INIT")
    assert client.query("*OPC?") == "1"
    assert client.errors() == [-213]


def test_wai_holds_the_next_command(sim, client):
    sim.time_scale = 1.0
    client.write(":SWE:POIN 101;:BAND 1e3")
    t0 = time.monotonic()
    reply = client.query(":INIT;*WAI;:TRAC? S11")
    assert time.monotonic() - t0 > 0.09 and len(reply.split(",")) == 202


def test_abort_makes_a_running_sweep_stale(sim, client):
    sim.time_scale = 1.0
    client.write(":SWE:POIN 101;:BAND 100;:INIT;:ABOR")
    client.write(":TRAC? S11")
    assert client.expect_silence(0.1) == b""
    assert client.errors() == [-230]


def test_bus_trigger(client):
    client.write(":TRIG:SOUR BUS")
    assert client.query(":TRIG:SOUR?") == "BUS"
    client.write(":INIT")
    client.write(":TRAC? S11")
    assert client.expect_silence(0.1) == b""
    client.write("*TRG")
    assert client.query("*OPC?") == "1"
    assert len(client.query(":TRAC? S11").split(",")) == 402
    client.write("*TRG")
    assert client.errors() == [-230, -211]


def test_continuous_mode_serves_fresh_sweeps(sim, client):
    sim.bench.noise = True
    client.write(":INIT:CONT ON")
    first = client.query(":TRAC? S11")
    second = client.query(":TRAC? S11")
    assert first != second  # new noise every sweep
    client.write(":INIT")
    assert client.errors() == [-213]


def test_output_off_gives_noise_only(sim, client):
    client.write(":OUTP OFF;:INIT")
    client.query("*OPC?")
    assert set(client.query(":TRAC? S11").split(",")) == {"0.0"}


def test_standard_switch_changes_the_fixture(sim, client):
    for channel, name in enumerate(["open", "short", "load", "thru", "device"], start=1):
        assert client.query(f":ROUT:CLOS (@{channel});*OPC?") == "1"
        assert sim.bench.connected == name
        assert client.query(f":ROUT:CLOS? (@{channel},{channel % 5 + 1})") == "1,0"


def test_query_interrupted_when_the_client_does_not_read(sim):
    # IEEE Std 488.2: a new message while a response is still pending → −410
    with socket.socket() as sock:
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, 4096)
        sock.connect(("127.0.0.1", sim.tcp.port))
        sock.settimeout(60.0)  # a bound for a loaded machine, not a wait
        sock.sendall(b":SWE:POIN 200001;:FORM REAL,64;:INIT;*OPC?\n")
        assert sock.recv(10) == b"1\n"
        sock.sendall(b":TRAC? S11\n")
        assert select.select([sock], [], [], 60.0)[0]  # the reply has begun
        sock.sendall(b"*ESE 0\n")  # ... and is not read: the simulator's writes block
        assert wait_for(lambda: sim.core.status.count() > 0, 60.0)  # it queued the error
        received = 0
        sock.settimeout(0.5)
        with contextlib.suppress(TimeoutError):
            while chunk := sock.recv(1 << 20):
                received += len(chunk)
        assert received < 200001 * 16  # the rest of the reply was discarded
        sock.settimeout(10.0)
        sock.sendall(b":SYST:ERR?\n")
        assert sock.recv(100).startswith(b'-410,"Query INTERRUPTED')


def session_alive(sim: SimServer) -> bool:
    thread = sim.tcp._session_thread
    return thread is not None and thread.is_alive()


def test_query_unterminated_when_closed_mid_query(sim):
    with RawClient(sim.tcp_resource) as c:
        c.sock.sendall(b"*IDN?")  # no terminator
        assert wait_for(lambda: session_alive(sim), 10.0)  # the simulator took the client
    assert wait_for(lambda: not session_alive(sim), 10.0)  # ... and has seen it close
    with RawClient(sim.tcp_resource) as c:
        assert c.errors() == [-420]


def test_second_client_is_refused(sim, client):
    with RawClient(sim.tcp_resource) as other:
        assert other.read_line() == '-300,"Device busy;another client is connected"'
        assert other.sock.recv(100) == b""  # closed
    assert client.query("*IDN?").startswith("sweepd-sim")


def test_overlong_message_is_discarded(client):
    client.sock.sendall(b"X" * ((1 << 20) + 10) + b"\n")
    assert client.query("*IDN?").startswith("sweepd-sim")
    assert client.errors() == [-363]


def test_frozen_mode_serves_the_cached_reply():
    with SimServer(frozen=True, noise=True) as sim, RawClient(sim.tcp_resource) as c:
        c.write(":SWE:POIN 201;:FORM REAL,64")
        replies = []
        for _ in range(3):
            assert c.query(":INIT;*OPC?") == "1"
            c.write(":TRAC? S11")
            replies.append(c.read_block())
        assert replies[0] == replies[1] == replies[2]
        assert sim.core.sweep_count == 3
        c.write(":SWE:POIN 101")
        assert c.query(":INIT;*OPC?") == "1"
        c.write(":TRAC? S11")
        assert len(c.read_block()) == 101 * 16


def test_stop_ends_every_thread_even_while_waiting():
    import threading

    sim = SimServer(serial=True, time_scale=1.0).start()
    client = RawClient(sim.tcp_resource)
    client.write(":BAND 1;:SWE:POIN 1000;:INIT;*OPC?")  # a 1000 s sweep
    sim.faults.arm("stall", seconds=60, on="reply", endpoint="serial")
    assert wait_for(sim.core.sweeping, 10.0)  # the client's session waits on the sweep
    sim.stop()
    client.close()
    assert [t.name for t in threading.enumerate() if t.name.startswith("sim-")] == []


_SCPI_ALPHABET = st.sampled_from(
    [":", ";", "?", "*", ",", " ", "#", "(", ")", "@", "'", '"', "1", "2", "9", "E", "-", ".",
     "SENS", "FREQ", "STAR", "STOP", "SWE", "POIN", "TRAC", "S11", "FORM", "REAL", "ROUT",
     "CLOS", "SYST", "ERR", "IDN", "OPC", "MIN", "MAX", "ON", "AVER", "#H", "#3", "GHZ"])


@settings(max_examples=300, deadline=None)
@example(b"#\xc2\xb2")  # '#²': a Unicode digit is not a block header (found by hypothesis)
@example(b"A??")  # two query marks: a syntax error, not a crash (found by hypothesis)
@given(st.one_of(st.binary(max_size=60),
                 st.lists(_SCPI_ALPHABET, max_size=20).map(lambda xs: "".join(xs).encode())))
def test_parser_survives_any_bytes(message):
    # whatever arrives, the interpreter answers or queues a standard error; never raises
    sim = _FUZZ_SIM
    with sim.core.lock:
        sim.core.status.clear()
        outcome = Interpreter(sim.tree, sim.core.status, b"\n", _FakeSession()).execute(message)
        codes = [sim.core.status.pop()[0] for _ in range(sim.core.status.count())]
    assert outcome.response is None or outcome.response.endswith(b"\n")
    assert all(c in TEXT for c in codes)


class _FakeSession:
    name = "tcp"


_FUZZ_SIM = SimServer(tcp_port=None, control_port=None)
