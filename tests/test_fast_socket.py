"""The raw-socket fast path and its fallback (drivers.links.fast_socket_problem).

The fast path takes over the socket pyvisa-py opened, relying on three private internals
of pyvisa-py's socket session. These tests fail loudly, naming the internal, when an
installed pyvisa-py no longer has them; and they show that without them every sweep still
works, through pyvisa's public read/write calls, after exactly one warning line.
"""

from __future__ import annotations

import logging
import re
import socket
import time
from importlib.metadata import version
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

import drivers.transport
from drivers.analyzer import Analyzer
from drivers.dialect import load_dialect
from drivers.links import TESTED_PYVISA_PY, SocketLink, fast_socket_problem
from drivers.stimulus import Stimulus
from drivers.transport import Transport
from drivers.visalinks import VisaLink
from simulators.server import SimServer

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def sim():
    with SimServer(time_scale=0.0, noise=False) as server:
        yield server


def test_installed_pyvisa_py_is_a_tested_release_and_pyproject_says_so() -> None:
    installed = tuple(int(part) for part in version("pyvisa-py").split(".")[:2])
    assert installed in TESTED_PYVISA_PY, (
        f"pyvisa-py {version('pyvisa-py')} is not among the releases the fast socket path "
        f"was tested with {TESTED_PYVISA_PY}: run this file and bench/acquire.py, then "
        "update drivers/links.py TESTED_PYVISA_PY and the bound in pyproject.toml")
    text = (ROOT / "pyproject.toml").read_text()
    bound = re.search(r'"pyvisa-py>=([\d.]+),<([\d.]+)"', text)
    assert bound, "pyproject.toml must bound pyvisa-py from both sides"
    low = tuple(int(p) for p in bound[1].split("."))[:2]
    high = tuple(int(p) for p in bound[2].split("."))[:2]
    assert low == min(TESTED_PYVISA_PY) and high > max(TESTED_PYVISA_PY)


def test_pyvisa_py_internals_used_by_the_fast_path_are_there(sim: SimServer) -> None:
    t = Transport(sim.tcp_resource)
    t.open()
    try:
        problem = fast_socket_problem(t._resource)
        assert problem is None, (
            f"pyvisa-py {version('pyvisa-py')} changed its socket session: {problem}. "
            "Sweeps still work through the slower public path; see drivers/links.py.")
        assert isinstance(t._link, SocketLink)
        assert t.query("*IDN?").startswith("sweepd-sim")
    finally:
        t.close()


@pytest.mark.parametrize(
    ("session", "words"),
    [
        (None, "does not hold the session"),
        (SimpleNamespace(interface=None, _pending_buffer=bytearray()), "no socket"),
        (SimpleNamespace(interface="a string", _pending_buffer=bytearray()), "no socket"),
        (SimpleNamespace(interface="sock"), "'_pending_buffer'"),
        (SimpleNamespace(interface="sock", _pending_buffer=b""), "'_pending_buffer'"),
    ],
)
def test_each_missing_internal_is_named(session, words: str) -> None:
    with socket.socket() as sock:
        if session is not None and session.interface == "sock":
            session.interface = sock
        lib = SimpleNamespace(sessions={} if session is None else {7: session})
        assert words in fast_socket_problem(SimpleNamespace(visalib=lib, session=7))
    assert "no sessions table" in fast_socket_problem(
        SimpleNamespace(visalib=SimpleNamespace(), session=7))


def test_without_the_internals_sweeps_fall_back_with_one_warning(
        sim: SimServer, monkeypatch: pytest.MonkeyPatch, caplog: pytest.LogCaptureFixture
) -> None:
    dialect = load_dialect("scpi-generic")
    stimulus = Stimulus(2.3e9, 2.6e9, 10001, -10.0, 1e3)
    with Analyzer(sim.tcp_resource, dialect, timeout_s=5.0) as an:
        an.configure(stimulus)
        fast = an.sweep(["S11", "S21"])
    monkeypatch.setattr(drivers.transport, "_WARNED", set())
    monkeypatch.setattr(drivers.transport, "fast_socket_problem",
                        lambda resource: "pyvisa-py's socket session has no socket")
    caplog.set_level(logging.WARNING)
    for _ in range(2):  # a second connection does not warn again
        _released(sim)  # the public path cannot see a refusing peer hang up (see visalinks)
        with Analyzer(sim.tcp_resource, dialect, timeout_s=5.0) as an:
            assert isinstance(an.transport._link, VisaLink)
            an.configure(stimulus)
            slow = an.sweep(["S11", "S21"])
            np.testing.assert_array_equal(slow[0], fast[0])
            np.testing.assert_array_equal(slow[1], fast[1])
    warnings = [r for r in caplog.records if r.levelno >= logging.WARNING]
    assert len(warnings) == 1
    assert warnings[0].getMessage() == (
        "fast socket path off (pyvisa-py's socket session has no socket); using pyvisa's "
        "public read/write path, which is slower")
    assert "\n" not in warnings[0].getMessage()


def _released(sim: SimServer, wait_s: float = 5.0) -> None:
    """Wait until the simulator has finished serving the previous client."""
    end = time.monotonic() + wait_s
    thread = sim.tcp._session_thread
    while thread is not None and thread.is_alive() and time.monotonic() < end:
        time.sleep(0.01)


def test_public_path_survives_faults(sim: SimServer, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(drivers.transport, "fast_socket_problem", lambda resource: "test")
    monkeypatch.setattr(drivers.transport, "_WARNED", {"test"})
    _released(sim)
    t = Transport(sim.tcp_resource, timeout_s=0.5)
    t.open()
    try:
        assert isinstance(t._link, VisaLink)
        sim.faults.arm("stall", seconds=0.8, on="reply")
        with pytest.raises(drivers.transport.InstrumentTimeout):
            t.query("*IDN?")
        assert t.query("*IDN?").startswith("sweepd-sim")  # the late reply was dropped
        sim.faults.arm("garbage", on="reply")
        assert t.query("*IDN?") != ""  # a garbage line is a line
        assert t.query("*IDN?").startswith("sweepd-sim")
    finally:
        t.close()
