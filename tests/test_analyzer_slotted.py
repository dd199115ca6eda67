"""The analyzer adapter through the new dialect features, against the slotted simulator and
the fake instrument: define/select then read, polling, axis from a block or from edge
queries, unit suffixes, quoted and padded replies, a separate read request, delays, an
identity of another shape, measurement cleanup and the sweep-time bound."""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np
import pytest
import yaml
from fake_instrument import FakeInstrument
from test_analyzer import STIM, TWO_PORT, columns, expected_raw

from drivers.analyzer import Analyzer
from drivers.dialect import DIALECT_DIR, load_dialect
from drivers.errors import DialectError, InstrumentError, ReplyError, SettingMismatch
from drivers.replies import Identity
from drivers.stimulus import Stimulus
from drivers.transport import Transport
from simulators.server import SimServer

SLOTTED = yaml.safe_load((DIALECT_DIR / "slotted-blocks.yaml").read_text())
GENERIC = yaml.safe_load((DIALECT_DIR / "scpi-generic.yaml").read_text())


@pytest.fixture(scope="module")
def slotted():
    with SimServer(personality="slotted", serial=True, time_scale=0.0, noise=False) as sim:
        yield sim


def variant(tmp_path: Path, base: dict, **sections: object):
    doc = yaml.safe_load(yaml.safe_dump(base))
    for dotted, value in sections.items():
        node = doc
        *parents, last = dotted.split("__")
        for part in parents:
            node = node.setdefault(part, {})
        if value is None:
            node.pop(last, None)
        else:
            node[last] = value
    path = tmp_path / f"variant-{abs(hash(str(sorted(sections))))}.yaml"
    path.write_text(yaml.safe_dump(doc))
    return load_dialect(path)


@pytest.mark.parametrize("endpoint", ["tcp", "serial"])
@pytest.mark.parametrize("data_format", [None, "real32", "ascii"])
@pytest.mark.parametrize("params", [["S11"], TWO_PORT], ids=["1port", "2port"])
def test_define_select_read_by_number(slotted, endpoint: str, data_format: str | None,
                                      params: list[str]) -> None:
    resource = slotted.tcp_resource if endpoint == "tcp" else slotted.serial_resource
    with Analyzer(resource, load_dialect("slotted-blocks"), timeout_s=3.0,
                  data_format=data_format) as an:
        assert an.identity == Identity("sweepd-sim", "slotted-2port", "SIM0003", "0.9")
        assert an.data_format == (data_format or "real64")
        assert an.byte_order == "big" or an.data_format == "ascii"
        applied = an.configure(STIM)
        assert applied == STIM  # read back in kHz and dBm with suffixes, points padded
        freq, data = an.sweep(params)
    # the axis is a big-endian REAL,64 block in kHz: x 1e3 is exact to a rounding step
    np.testing.assert_allclose(freq, np.linspace(2.3e9, 2.6e9, 201), rtol=1e-15)
    want = columns(expected_raw(slotted, applied), params)
    if data_format == "real32":
        want = want.real.astype(np.float32) + 1j * want.imag.astype(np.float32)
    np.testing.assert_array_equal(data, want)


def slot_definitions(sim) -> list[str]:
    """What slots 1..4 hold, asked over the pseudo-terminal (a second way in while TCP
    is busy; the serial line has no connections to wait for)."""
    other = Transport(sim.serial_resource, read_termination="\r\n")
    other.open()
    try:
        return [other.query(f"SLOT{n}:DEF?") for n in (1, 2, 3, 4)]
    finally:
        other.close()


def test_cleanup_on_close_deletes_the_slots(slotted) -> None:
    with Analyzer(slotted.tcp_resource, load_dialect("slotted-blocks")) as an:
        an.configure(STIM)
        an.sweep(["S21"])
        assert slot_definitions(slotted) == TWO_PORT  # defined while the session runs
    assert slot_definitions(slotted) == ["NONE"] * 4


def test_polling_waits_for_the_sweep(tmp_path: Path) -> None:
    stim = Stimulus(2.3e9, 2.6e9, 201, -10.0, 1e3, 1)  # 207 ms by the simulator's model
    esr = variant(tmp_path, SLOTTED,
                  trigger__poll={"query": "*ESR?", "arm": "*OPC", "done_bit": 0})
    busy_bit = variant(tmp_path, SLOTTED, session__opc_query=None, trigger__poll={
        "query": "ACQuire:BUSY?", "done_bit": 0, "done_when": "clear"})
    with SimServer(personality="slotted", time_scale=1.0, noise=False) as sim:
        for dialect in (load_dialect("slotted-blocks"), esr, busy_bit):
            with Analyzer(sim.tcp_resource, dialect) as an:
                an.configure(stim)
                started = time.monotonic()
                an.sweep(["S11"])
                assert time.monotonic() - started >= 0.2


def test_without_its_delay_the_preset_breaks_the_opening(tmp_path: Path) -> None:
    hasty = variant(tmp_path, SLOTTED, quirks__delays=None)
    with SimServer(personality="slotted", time_scale=1.0) as sim:
        with pytest.raises(InstrumentError), Analyzer(sim.tcp_resource, hasty, timeout_s=0.3):
            pass
        with Analyzer(sim.tcp_resource, load_dialect("slotted-blocks")) as an:
            assert an.data_format == "real64"


def test_axis_from_edge_queries_with_unit_suffixes(slotted, tmp_path: Path) -> None:
    edges = variant(tmp_path, SLOTTED, data__frequency={
        "start": "CHANnel:FSTart?", "stop": "CHANnel:FSTop?", "points": "CHANnel:NPOints?"})
    with Analyzer(slotted.tcp_resource, edges) as an:
        an.configure(STIM)
        freq, _ = an.sweep(["S11"])
    np.testing.assert_array_equal(freq, np.linspace(2.3e9, 2.6e9, 201))


def test_the_sweep_time_bound(slotted) -> None:
    with SimServer(personality="slotted", time_scale=1.0) as sim:
        an = Analyzer(sim.tcp_resource, load_dialect("slotted-blocks"), max_sweep_time_s=0.1)
        with an, pytest.raises(ReplyError) as info:
            an.configure(STIM)  # 207 ms claimed
    assert "'ACQuire:DURation?' claims a sweep takes 0.20702 s, more than " \
           "instrument.max_sweep_time (0.1 s): refused" in str(info.value)


def test_padded_quoted_replies_behind_a_read_request_and_another_identity(
    tmp_path: Path,
) -> None:
    dialect = variant(
        tmp_path, GENERIC,
        session__identity="SYST:IDEN?",
        session__identity_reply={"separator": ";", "fields": ["model", "skip", "serial"]},
        quirks={"unquote_replies": True, "strip_padding": True, "read_request": "READ"},
    )
    with FakeInstrument(pad=True, quote=True, read_request=True,
                        identity=("SYST:IDEN?", "vna-x;rev2;F0042")) as fake:
        with Analyzer(fake.resource, dialect, data_format="ascii") as an:
            assert an.identity == Identity("", "vna-x", "F0042", "")
            stim = Stimulus(1e9, 2e9, 11, 0.0, 1e3)
            assert an.configure(stim) == stim
            _freq, data = an.sweep(["S11"])
        np.testing.assert_array_equal(data[:, 0], fake.expected_trace())
        assert "READ" in fake.received and fake.held == []


def test_without_the_read_request_quirk_the_fake_never_answers(tmp_path: Path) -> None:
    with FakeInstrument(read_request=True) as fake, pytest.raises(InstrumentError), Analyzer(
        fake.resource, load_dialect("scpi-generic"), timeout_s=0.3
    ):
        pass


@pytest.mark.parametrize("data_format", ["ascii", "real32", "real64"])
def test_each_point_with_its_frequency(tmp_path: Path, data_format: str) -> None:
    triples = variant(tmp_path, GENERIC, data__layout="freq_re_im")
    stim = Stimulus(1e9, 2e9, 11, 0.0, 1e3)
    with FakeInstrument(triplets=True) as fake, Analyzer(
        fake.resource, triples, data_format=data_format
    ) as an:
        an.configure(stim)
        freq, data = an.sweep(["S11"])
        want = fake.expected_trace()
    if data_format == "real32":
        want = want.real.astype(np.float32) + 1j * want.imag.astype(np.float32)
        np.testing.assert_allclose(freq, stim.frequencies(), rtol=2**-24)
    else:
        np.testing.assert_array_equal(freq, stim.frequencies())
    np.testing.assert_array_equal(data[:, 0], want)


def test_a_freq_layout_takes_no_axis_query(tmp_path: Path) -> None:
    doc = yaml.safe_load(yaml.safe_dump(GENERIC))
    doc["data"]["layout"] = "freq_db_deg"
    doc["data"]["frequency"] = {"query": ":SENS:FREQ:DATA?"}
    path = tmp_path / "x.yaml"
    path.write_text(yaml.safe_dump(doc))
    with pytest.raises(DialectError, match=r"data\.frequency: layout freq_db_deg sends the "
                                           r"frequencies with each trace"):
        load_dialect(path)


def test_a_fixed_power_is_never_sent_and_a_plan_asking_another_is_refused(
    tmp_path: Path,
) -> None:
    fixed = variant(tmp_path, GENERIC, settings__power={"fixed": 0.0,
                                                        "tolerance": {"absolute": 0.01}})
    with FakeInstrument() as fake, Analyzer(fake.resource, fixed) as an:
        stim = Stimulus(1e9, 2e9, 11, 0.0, 1e3)
        assert an.configure(stim) == stim
        assert not any("POW" in line.upper() for line in fake.received)
        with pytest.raises(SettingMismatch) as info:
            an.configure(Stimulus(1e9, 2e9, 11, -10.0, 1e3))
    assert "setting power: the plan asks -10 dBm, the instrument has a fixed 0 dBm" in str(
        info.value) and "settings.power.fixed" in str(info.value)
