"""The analyzer adapter end to end: both simulator personalities over TCP and a pty.

The oracle for trace data is the simulated bench itself: with noise off, the simulator's
``bench.sweep`` on the same grid gives the raw S-parameters the instrument encodes, so the
driver must return them exactly (REAL,64, shortest round-trip ASCII), to float32 rounding
(REAL,32, IEEE 754 single precision) or to the 6 decimals of the tabletop's dB/degree text.
Malformed replies come from the simulator's wire faults; each must give one clear line.
"""

from __future__ import annotations

import re
import time
from pathlib import Path

import numpy as np
import pytest
import yaml

import simulators.server as server
from drivers.analyzer import Analyzer, Identity
from drivers.dialect import DIALECT_DIR, load_dialect
from drivers.errors import (
    BlockError,
    ConnectError,
    ConnectionLost,
    DialectError,
    InstrumentTimeout,
    ScpiErrorQueue,
    SettingMismatch,
    StimulusError,
)
from drivers.stimulus import Stimulus

STIM = Stimulus(2.3e9, 2.6e9, 201, -10.0, 1e3, 1)
TWO_PORT = ["S11", "S21", "S12", "S22"]
INDEX = {"S11": (0, 0), "S21": (1, 0), "S12": (0, 1), "S22": (1, 1)}


@pytest.fixture(scope="module")
def generic():
    with server.SimServer(personality="generic", serial=True, time_scale=0.0, noise=False) as sim:
        yield sim


@pytest.fixture(scope="module")
def tabletop():
    with server.SimServer(personality="tabletop", serial=True, time_scale=0.0, noise=False) as sim:
        yield sim


@pytest.fixture
def fresh_generic():
    with server.SimServer(personality="generic", time_scale=0.0, noise=False) as sim:
        yield sim


def expected_raw(sim, applied: Stimulus) -> np.ndarray:
    """The bench's raw S (n, 2, 2) for the applied stimulus (noise off: deterministic)."""
    return sim.bench.sweep(
        applied.frequencies(), applied.power_dbm, applied.if_bandwidth_hz, applied.averaging
    )


def columns(raw: np.ndarray, params: list[str]) -> np.ndarray:
    return np.stack([raw[:, i, j] for i, j in (INDEX[p] for p in params)], axis=1)


def resource(sim, endpoint: str) -> str:
    return sim.tcp_resource if endpoint == "tcp" else sim.serial_resource


# -- happy paths -----------------------------------------------------------------------------
@pytest.mark.parametrize("endpoint", ["tcp", "serial"])
@pytest.mark.parametrize(
    ("data_format", "byte_order"),
    [(None, None), ("real64", "big"), ("real32", "little"), ("real32", "big"), ("ascii", None)],
)
@pytest.mark.parametrize("params", [["S11"], TWO_PORT], ids=["1port", "2port"])
def test_generic_sweep_returns_what_the_instrument_measured(
    generic, endpoint: str, data_format: str | None, byte_order: str | None, params: list[str]
) -> None:
    dialect = load_dialect("scpi-generic")
    with Analyzer(
        resource(generic, endpoint),
        dialect,
        timeout_s=3.0,
        data_format=data_format,
        byte_order=byte_order,
    ) as an:
        assert an.data_format == (data_format or "real64")
        if an.data_format != "ascii":
            assert an.byte_order == (byte_order or "little")
        applied = an.configure(STIM)
        assert applied == STIM
        freq, data = an.sweep(params)
    assert freq.dtype == np.float64 and freq.shape == (201,)
    np.testing.assert_array_equal(freq, np.linspace(2.3e9, 2.6e9, 201))
    assert data.dtype == np.complex128 and data.shape == (201, len(params))
    want = columns(expected_raw(generic, applied), params)
    if data_format == "real32":
        # IEEE 754 single precision: each part carries a relative rounding of 2**-24.
        want = want.real.astype(np.float32) + 1j * want.imag.astype(np.float32)
    np.testing.assert_array_equal(data, want)


@pytest.mark.parametrize("endpoint", ["tcp", "serial"])
@pytest.mark.parametrize("params", [["S11"], TWO_PORT], ids=["1port", "2port"])
def test_tabletop_sweep_in_db_deg_and_mhz(tabletop, endpoint: str, params: list[str]) -> None:
    dialect = load_dialect("tabletop-ascii")
    with Analyzer(resource(tabletop, endpoint), dialect, timeout_s=3.0) as an:
        assert an.identity == Identity("sweepd-sim", "tabletop-2port", "SIM0002", "2.3")
        assert an.data_format == "ascii"
        applied = an.configure(STIM)
        assert applied == STIM
        freq, data = an.sweep(params)
    # The axis comes from MEASure:AXIS? in MHz with 9 decimals: 1 mHz resolution.
    np.testing.assert_allclose(freq, np.linspace(2.3e9, 2.6e9, 201), rtol=0, atol=1e-3)
    want = columns(expected_raw(tabletop, applied), params)
    # 6 decimals of dB and degrees: |dS|/|S| <= ln(10)/20 * 5e-7 + pi/180 * 5e-7 < 7e-8.
    np.testing.assert_allclose(data, want, rtol=1e-7, atol=0)


def test_identity_and_settings_read_back(generic) -> None:
    with Analyzer(generic.tcp_resource, load_dialect("scpi-generic")) as an:
        assert an.identity == Identity("sweepd-sim", "generic-2port", "SIM0001", "1.0")
        assert str(an.identity) == "sweepd-sim,generic-2port,SIM0001,1.0"
        stim = Stimulus(0.9e9, 0.93e9, 101, -5.0, 10e3, 4)
        assert an.configure(stim) == stim
        assert an.settings_match(stim)
        assert not an.settings_match(STIM)
        assert an.read_settings() == stim
        settings = generic.core.settings
        assert (settings.avg_on, settings.avg_count) == (True, 4)
        an.configure(STIM)
        assert (generic.core.settings.avg_on, generic.core.settings.avg_count) == (False, 1)


def test_new_start_above_the_present_stop(generic) -> None:
    with Analyzer(generic.tcp_resource, load_dialect("scpi-generic")) as an:
        an.configure(Stimulus(10e6, 20e6, 11, 0.0, 1e3))
        high = Stimulus(8e9, 9e9, 11, 0.0, 1e3)
        assert an.configure(high) == high


def test_sweep_without_configure_reads_the_settings(generic) -> None:
    with Analyzer(generic.tcp_resource, load_dialect("scpi-generic")) as an:
        an.configure(STIM)
    with Analyzer(generic.tcp_resource, load_dialect("scpi-generic")) as an:
        freq, _data = an.sweep(["S21"])
        assert freq.size == 201 and an.applied == STIM


def test_trigger_and_read_traces_separately(generic, tabletop) -> None:
    for sim, name in ((generic, "scpi-generic"), (tabletop, "tabletop-ascii")):
        with Analyzer(sim.tcp_resource, load_dialect(name)) as an:
            applied = an.configure(STIM)
            an.trigger()
            _freq, data = an.read_traces(["S22", "S11"])
            want = columns(expected_raw(sim, applied), ["S22", "S11"])
            np.testing.assert_allclose(data, want, rtol=1e-7)


def test_one_point_sweep(generic) -> None:
    with Analyzer(generic.tcp_resource, load_dialect("scpi-generic")) as an:
        stim = Stimulus(2.45e9, 2.45e9, 1, 0.0, 1e3)
        an.configure(stim)
        freq, data = an.sweep(["S11"])
        assert freq.tolist() == [2.45e9] and data.shape == (1, 1)


def test_large_binary_sweep(generic) -> None:
    with Analyzer(
        generic.tcp_resource, load_dialect("scpi-generic"), data_format="real64", byte_order="big"
    ) as an:
        applied = an.configure(Stimulus(1e9, 3e9, 20001, 0.0, 1e3))
        _freq, data = an.sweep(["S11", "S21"])
        np.testing.assert_array_equal(data, columns(expected_raw(generic, applied), ["S11", "S21"]))


def test_select_standard_generic_and_tabletop(generic, tabletop) -> None:
    for sim, name in ((generic, "scpi-generic"), (tabletop, "tabletop-ascii")):
        with Analyzer(sim.tcp_resource, load_dialect(name)) as an:
            for standard in ("open", "short", "load", "thru", "device"):
                an.select_standard(standard)
                assert sim.bench.connected == standard
            with pytest.raises(DialectError, match="not a standard: 'match'"):
                an.select_standard("match")


def test_switch_measures_the_standard(generic) -> None:
    with Analyzer(generic.serial_resource, load_dialect("scpi-generic")) as an:
        applied = an.configure(STIM)
        an.select_standard("short")
        _, data = an.sweep(["S11"])
        np.testing.assert_array_equal(data, columns(expected_raw(generic, applied), ["S11"]))
        an.select_standard("device")


# -- dialect-level refusals ----------------------------------------------------------------
def variant(tmp_path: Path, base: str, edit) -> Path:
    doc = yaml.safe_load((DIALECT_DIR / f"{base}.yaml").read_text())
    edit(doc)
    path = tmp_path / f"{base}-variant.yaml"
    path.write_text(yaml.safe_dump(doc))
    return path


def test_dialect_without_switch_or_averaging(generic, tmp_path: Path) -> None:
    def edit(doc: dict) -> None:
        del doc["switch"]
        del doc["settings"]["averaging"]
        del doc["data"]["traces"]["S12"]

    dialect = load_dialect(variant(tmp_path, "scpi-generic", edit))
    with Analyzer(generic.tcp_resource, dialect) as an:
        with pytest.raises(
            DialectError,
            match=r"has no standard switch \(no 'switch' section\); connect the open by hand",
        ):
            an.select_standard("open")
        with pytest.raises(
            DialectError, match="settings has no averaging entry, so averaging 8 cannot be set"
        ):
            an.configure(Stimulus(1e9, 2e9, 11, 0.0, 1e3, 8))
        an.configure(STIM)
        with pytest.raises(
            DialectError, match=r"data.traces has no token for S12 \(has S11, S21, S22\)"
        ):
            an.sweep(["S11", "S12"])
        with pytest.raises(DialectError, match=r"not an S-parameter: 'S13'"):
            an.sweep(["S13"])
        with pytest.raises(DialectError, match="asked for twice"):
            an.sweep(["S11", "S11"])


def test_nothing_but_checked_values_reach_the_instrument(generic) -> None:
    with Analyzer(generic.tcp_resource, load_dialect("scpi-generic")) as an:
        with pytest.raises(StimulusError, match="setting power: cannot send a non-finite number"):
            an.configure(Stimulus(1e9, 2e9, 11, float("inf"), 1e3))
        with pytest.raises(DialectError, match=r"not an S-parameter: 'S11;\*RST'"):
            an.sweep(["S11;*RST"])
        with pytest.raises(DialectError, match=r"not a standard: 'open;\*RST'"):
            an.select_standard("open;*RST")
        assert an.error_queue() == []


def test_bad_format_arguments() -> None:
    generic = load_dialect("scpi-generic")
    with pytest.raises(
        DialectError, match="data format must be one of ascii, real32, real64, got 'real16'"
    ):
        Analyzer("TCPIP::127.0.0.1::5025::SOCKET", generic, data_format="real16")
    with pytest.raises(DialectError, match="byte order must be big or little, got 'middle'"):
        Analyzer("TCPIP::127.0.0.1::5025::SOCKET", generic, byte_order="middle")
    with pytest.raises(
        DialectError, match=r"data\.formats offers ascii; 'real64' is not one of them"
    ):
        Analyzer(
            "TCPIP::127.0.0.1::5025::SOCKET", load_dialect("tabletop-ascii"), data_format="REAL,64"
        )
    with pytest.raises(DialectError, match="has no binary formats, so no byte order"):
        Analyzer("TCPIP::127.0.0.1::5025::SOCKET", load_dialect("tabletop-ascii"), byte_order="big")


# -- instrument-level refusals -----------------------------------------------------------------
def test_out_of_range_setting_is_an_error_queue_entry(generic) -> None:
    with Analyzer(generic.tcp_resource, load_dialect("scpi-generic")) as an:
        with pytest.raises(ScpiErrorQueue) as info:
            an.configure(Stimulus(1e9, 2e9, 11, 0.0, 5e6))  # IF bandwidth above 1 MHz
        message = str(info.value)
        assert message.startswith(
            f"instrument {generic.tcp_resource}: error queue after sending the settings"
        )
        assert info.value.entries and info.value.entries[0][0] == -222
        assert "\n" not in message
        assert an.error_queue() == []


def test_coerced_setting_is_a_mismatch(tabletop) -> None:
    # The tabletop rounds the receiver width to a 1-2-5 step; 1234 Hz reads back as 1 kHz.
    with (
        Analyzer(tabletop.tcp_resource, load_dialect("tabletop-ascii")) as an,
        pytest.raises(SettingMismatch) as info,
    ):
        an.configure(Stimulus(1e9, 2e9, 11, 0.0, 1234.0))
    assert str(info.value) == (
        f"instrument {tabletop.tcp_resource}: setting if_bandwidth: sent 1234 Hz "
        "('RECeiver:WIDTh 1234.0'), read back 1000 Hz ('RECeiver:WIDTh?')"
    )


def test_settle_quirk_needs_opc_after_each_setting(tmp_path: Path) -> None:
    # Without '*OPC?' after each setting the tabletop still answers with the old value.
    path = variant(
        tmp_path, "tabletop-ascii", lambda d: d["session"].update(opc_after_setting=False)
    )
    with server.SimServer(personality="tabletop", time_scale=1.0, noise=False) as sim:
        with (
            Analyzer(sim.tcp_resource, load_dialect(path)) as an,
            pytest.raises(SettingMismatch, match=r"setting (start|stop): sent"),
        ):
            an.configure(STIM)
        with Analyzer(sim.tcp_resource, load_dialect("tabletop-ascii")) as an:
            assert an.configure(STIM) == STIM


def test_error_entry_after_a_sweep(fresh_generic) -> None:
    with Analyzer(fresh_generic.tcp_resource, load_dialect("scpi-generic")) as an:
        an.configure(STIM)
        fresh_generic.faults.arm("error", code=-310, text="injected fault")
        _freq, data = an.sweep(["S11"])  # the data are kept; the queue says what happened
        assert data.shape == (201, 1)
        with pytest.raises(ScpiErrorQueue) as info:
            an.check_errors("after sweep 1")
        assert str(info.value) == (
            f"instrument {fresh_generic.tcp_resource}: error queue after sweep 1: "
            '-310 "injected fault"'
        )
        assert info.value.entries == ((-310, "injected fault"),)


def test_second_client_is_refused(generic) -> None:
    with Analyzer(generic.tcp_resource, load_dialect("scpi-generic")):
        second = Analyzer(generic.tcp_resource, load_dialect("scpi-generic"), connect_timeout_s=0.3)
        with pytest.raises(ConnectError) as info:
            second.open()
    assert "refused the connection: b'-300,\"Device busy" in str(info.value)


# -- bad replies on the wire -------------------------------------------------------------------
FAST = Stimulus(2.3e9, 2.6e9, 201, -10.0, 100e3)  # a sweep time of milliseconds
TRACE = r"':INIT:IMM;\*WAI;:TRAC:DATA\? S11'"
FAULTS = [
    (
        "garbage",
        {},
        BlockError,
        TRACE + r" (reply is not an IEEE 488.2 block|block header).*: starts b'",
    ),
    (
        "wrong_count",
        {},
        BlockError,
        TRACE + r" block holds 3200 bytes, expected 3216 \(201 points x 2 values of real64\)$",
    ),
    (
        "truncate",
        {"then": "stall"},
        BlockError,
        TRACE + r" block truncated: 3216 payload bytes announced, fewer arrived within 0.4\d* s$",
    ),
    (
        "truncate",
        {"then": "close"},
        ConnectionLost,
        TRACE + r" block truncated: the instrument closed the connection after \d+ of 3216 bytes$",
    ),
    (
        "stall",
        {"seconds": 0.6},
        InstrumentTimeout,
        "no complete reply to " + TRACE + r" within 0.4\d* s$",
    ),
    (
        "drop",
        {},
        ConnectionLost,
        "connection lost during " + TRACE + ": the instrument closed the connection$",
    ),
]


@pytest.mark.parametrize(
    ("kind", "options", "error", "words"), FAULTS, ids=[f"{k}-{o}" for k, o, _, _ in FAULTS]
)
def test_bad_reply_is_one_clear_line_and_the_next_sweep_is_right(
    fresh_generic, kind: str, options: dict, error: type, words: str
) -> None:
    sim = fresh_generic
    with Analyzer(sim.tcp_resource, load_dialect("scpi-generic"), timeout_s=0.4) as an:
        applied = an.configure(FAST)
        want = columns(expected_raw(sim, applied), ["S11"])
        sim.faults.arm(kind, **options)
        with pytest.raises(error) as info:
            an.sweep(["S11"])
        message = str(info.value)
        assert message.startswith(f"instrument {sim.tcp_resource}: ")
        assert re.search(words, message), message
        assert "\n" not in message
        if not an.transport.is_open:
            an.reconnect()
        for _ in range(2):
            _, data = an.sweep(["S11"])
            np.testing.assert_array_equal(data, want)
        assert an.settings_match(FAST)


def test_garbage_in_an_ascii_trace(tabletop) -> None:
    with Analyzer(tabletop.tcp_resource, load_dialect("tabletop-ascii"), timeout_s=1.0) as an:
        an.configure(STIM)
        tabletop.faults.arm("garbage")
        with pytest.raises(BlockError) as info:
            an.sweep(["S11"])
        assert f"instrument {tabletop.tcp_resource}: 'MEASure:VALues? REFL1' value list" in str(
            info.value
        ) or "is not a number" in str(info.value)
        tabletop.faults.arm("wrong_count")
        with pytest.raises(
            BlockError,
            match=r"value list holds 400 values, expected 201 points x 2 values of ascii",
        ):
            an.sweep(["S11"])
        _freq, data = an.sweep(["S11"])
        assert data.shape == (201, 1)


def test_serial_lost_reply_is_a_timeout_then_in_step(generic) -> None:
    with Analyzer(generic.serial_resource, load_dialect("scpi-generic"), timeout_s=0.4) as an:
        applied = an.configure(FAST)
        generic.faults.arm("drop", endpoint="serial")
        with pytest.raises(
            InstrumentTimeout, match="no complete reply to " + TRACE + r" within 0.4\d* s$"
        ):
            an.sweep(["S11"])
        _, data = an.sweep(["S11"])
        np.testing.assert_array_equal(data, columns(expected_raw(generic, applied), ["S11"]))


def test_reboot_is_detected_and_survived(fresh_generic) -> None:
    sim = fresh_generic
    with Analyzer(
        sim.tcp_resource, load_dialect("scpi-generic"), timeout_s=1.0, connect_timeout_s=0.2
    ) as an:
        an.configure(STIM)
        sim.faults.arm("reboot", down_s=0.3)
        with pytest.raises(ConnectionLost, match="connection lost during"):
            an.sweep(["S11"])
        time.sleep(0.5)  # the simulated reboot takes 0.3 s
        an.reconnect()
        assert not an.settings_match(STIM)  # it forgot the settings
        an.configure(STIM)
        assert an.settings_match(STIM)
        _, data = an.sweep(["S11"])
        assert data.shape == (201, 1)
