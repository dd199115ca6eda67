"""A busy instrument (serving another client) is named in words, with the sweepd job
that holds it when one on this computer does; no raw bytes in the message."""

from __future__ import annotations

from dataclasses import replace

import pytest
from test_station_support import write_plan

from acquire.capture.session import Session
from acquire.holders import busy_message
from acquire.plan import load_plan
from acquire.soak.spool import Spool
from drivers.errors import ConnectError
from simulators.server import SimServer

REFUSAL = ("instrument TCPIP::127.0.0.1::5025::SOCKET: refused the connection: "
           "b'-300,\"Device busy;another client is connected\"\\n'")


def test_refusal_in_words_without_a_holder(tmp_path):
    text = busy_message(REFUSAL, "TCPIP::127.0.0.1::5025::SOCKET", tmp_path / "spool")
    assert text.startswith("instrument TCPIP::127.0.0.1::5025::SOCKET is busy: it is serving "
                           'another client (it said "Device busy; another client is '
                           'connected" (error -300))')
    assert "No sweepd job on this computer holds it" in text
    assert "b'" not in text and "\\n" not in text
    assert busy_message("instrument X: no reply to '*IDN?' within 5 s", "X") is None


def test_the_soak_job_holding_the_instrument_is_named(tmp_path):
    spool = Spool(tmp_path / "spool")
    job = spool.create_job("patch-soak", tmp_path / "p.yaml", "plan: patch-soak\n",
                           tmp_path / "out", "tcpip::127.0.0.1::5025::socket")
    job.write_state(state="running", started_utc="2026-12-03T07:00:00Z")
    other = spool.create_job("whip-soak", tmp_path / "w.yaml", "plan: whip-soak\n",
                             tmp_path / "out", "TCPIP::127.0.0.1::6000::SOCKET")
    other.write_state(state="running")
    text = busy_message(REFUSAL, "TCPIP::127.0.0.1::5025::SOCKET", spool.root)
    assert (f"It is held by soak job {job.id} (plan patch-soak, submitted by" in text
            and "running since 2026-12-03T07:00:00Z under sweepd serve" in text)
    assert f"sweepd cancel {job.id}" in text and "whip-soak" not in text


def test_a_second_session_on_a_busy_simulator(tmp_path, monkeypatch):
    monkeypatch.setenv("SWEEPD_SPOOL", str(tmp_path / "no-spool"))
    with SimServer(time_scale=0.0, noise=False) as sim:
        plan = load_plan(write_plan(tmp_path, sim.tcp_resource))
        with Session(plan, sim.tcp_resource):
            quick = replace(plan, instrument=replace(plan.instrument, connect_timeout_s=0.3))
            second = Session(quick, sim.tcp_resource)
            with pytest.raises(ConnectError) as info:
                second.open()
    message = str(info.value)
    assert message.startswith(f"instrument {sim.tcp_resource} is busy: it is serving another")
    assert "Device busy; another client is connected" in message and "b'" not in message
