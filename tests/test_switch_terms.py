"""The analyzer's switch terms read as traces: the dialect key ``data.switch_terms``, the
driver reading them in the same sweep as the S-parameters, and the simulator serving them
in all three personalities.

Oracles: the simulator's noise-free switch terms (``Bench.switch_terms``, from the 8-term
relation of R. B. Marks, 50th ARFTG Digest, 1997, checked against scikit-rf in
tests/test_sim_twoport.py) and its noise model (simulators/bench.py: receiver noise relative
to the received wave; common practice).
"""

from __future__ import annotations

import copy
import re
from pathlib import Path

import numpy as np
import pytest
import yaml
from test_dialect import DELETE, GENERIC, TABLETOP, load_error, mutated, write

from drivers.analyzer import Analyzer
from drivers.dialect import DIALECT_DIR, SWITCH_TERMS, load_dialect
from drivers.errors import DialectError, InstrumentTimeout
from drivers.stimulus import Stimulus
from drivers.transport import Transport
from simulators.bench import noise_sigma
from simulators.server import SimServer

SLOTTED = yaml.safe_load((DIALECT_DIR / "slotted-blocks.yaml").read_text())
STIM = Stimulus(10e6, 6e9, 201, -10.0, 1e3)
ALL = ["S11", "S21", "S12", "S22", *SWITCH_TERMS]
# the generic personality's own trace names; SCPI names no trace for switch terms, so the
# shipped scpi-generic dialect does not declare them: a test dialect does
GENERIC_SWITCH = {"forward": "TERMF", "reverse": "TERMR"}
TERMS = "data.switch_terms"


def generic_with_switch_terms(tmp_path: Path) -> Path:
    return write(tmp_path, mutated(GENERIC, TERMS, dict(GENERIC_SWITCH)), "generic-sw.yaml")


# -- the dialect key ---------------------------------------------------------------------
def test_the_simulator_dialects_declare_them_and_the_generic_one_does_not() -> None:
    table, slots = load_dialect("tabletop-ascii"), load_dialect("slotted-blocks")
    assert dict(table.switch_terms) == {"switch.forward": "TERM2", "switch.reverse": "TERM1"}
    assert dict(slots.switch_terms) == {"switch.forward": "A2B2", "switch.reverse": "A1B1"}
    assert slots.trace_tokens("switch.reverse") == {"trace": "A1B1", "number": "6"}
    assert table.trace_tokens("switch.forward") == {"trace": "TERM2"}
    assert dict(load_dialect("scpi-generic").switch_terms) == {}


BAD = [
    (TERMS, "TERMF", f"{TERMS}: must be a mapping"),
    (f"{TERMS}.reverse", DELETE, f"{TERMS}.reverse: is required"),
    (f"{TERMS}.sideways", "X", f"{TERMS}: unknown key 'sideways'"),
    (f"{TERMS}.forward", "TERMF;*RST",
     f"{TERMS}.forward: trace token 'TERMF;*RST' may not contain a bare ';'"),
    (f"{TERMS}.forward", "", f"{TERMS}.forward: trace token must be a non-empty string"),
    (f"{TERMS}.forward", 7, f"{TERMS}.forward: trace token must be a non-empty string, got 7"),
    (f"{TERMS}.forward", "s21",
     f"{TERMS}.forward: trace token 's21' is already the token of data.traces.S21"),
    (f"{TERMS}.reverse", "TERMF",
     f"{TERMS}.reverse: trace token 'TERMF' is already the token of {TERMS}.forward"),
]


@pytest.mark.parametrize(("key", "value", "words"), BAD, ids=[f"{k}={v!r}" for k, v, _ in BAD])
def test_bad_switch_terms_name_their_key_path(tmp_path: Path, key: str, value: object,
                                              words: str) -> None:
    doc = mutated(GENERIC, TERMS, dict(GENERIC_SWITCH))
    assert words in load_error(tmp_path, mutated(doc, key, value))


def test_switch_terms_need_all_four_traces(tmp_path: Path) -> None:
    doc = mutated(GENERIC, TERMS, dict(GENERIC_SWITCH))
    doc = mutated(doc, "data.traces", {"S11": "S11", "S21": "S21"})
    assert (f"{TERMS}: needs data.traces to list all of S11, S21, S12, S22"
            in load_error(tmp_path, doc))


def test_measurement_tokens_must_cover_the_switch_terms(tmp_path: Path) -> None:
    doc = copy.deepcopy(SLOTTED)
    del doc["measurement"]["tokens"]["switch.reverse"]
    assert ("measurement.tokens: needs tokens for every switch term in data.switch_terms; "
            "missing switch.reverse") in load_error(tmp_path, doc)
    doc = copy.deepcopy(SLOTTED)
    doc["measurement"]["tokens"]["switch.forward"] = {"slot": 5}
    assert ("measurement.tokens.switch.forward: must name the same tokens as the others "
            "(number)") in load_error(tmp_path, doc)
    doc = copy.deepcopy(SLOTTED)
    doc["measurement"]["tokens"]["switch.middle"] = {"number": 7}
    assert "measurement.tokens: unknown key 'switch.middle'" in load_error(tmp_path, doc)


def test_one_trace_plus_switch_terms_must_name_the_trace(tmp_path: Path) -> None:
    doc = mutated(TABLETOP, "data.trace_query", "MEASure:VALues?")
    assert ("data.trace_query: template must use {trace} (or a measurement token) when "
            "data.traces and data.switch_terms list 6 traces") in load_error(tmp_path, doc)


# -- the driver against the three personalities --------------------------------------------
@pytest.mark.parametrize("personality", ["generic", "tabletop", "slotted"])
def test_each_personality_serves_the_switch_terms_of_the_sweep(tmp_path: Path,
                                                               personality: str) -> None:
    """Noise-free: binary blocks give the bench's switch terms exactly; the tabletop's
    ASCII dB/degree with 6 decimals rounds to about 1.2e-7 relative (bound 1e-6). The
    S-parameters of the same sweep are those of a plain sweep."""
    dialect = {"generic": generic_with_switch_terms(tmp_path), "tabletop": "tabletop-ascii",
               "slotted": "slotted-blocks"}[personality]
    with SimServer(personality=personality, time_scale=0.0, noise=False) as sim:
        sim.bench.connect("thru")
        with Analyzer(sim.tcp_resource, load_dialect(dialect)) as an:
            an.configure(STIM)
            assert an.reads_switch_terms
            freq, data = an.sweep(ALL)
            _, plain = an.sweep(ALL[:4])
            _, reordered = an.sweep(["switch.reverse", "S21"])
            an.check_errors("after reading the switch terms")
        gf, gr = sim.bench.switch_terms(freq)
    bound = 0.0 if personality != "tabletop" else 1e-6
    assert np.abs(data[:, 4] - gf).max() <= bound * np.abs(gf).max()
    assert np.abs(data[:, 5] - gr).max() <= bound * np.abs(gr).max()
    assert np.array_equal(data[:, :4], plain)
    assert np.array_equal(reordered, data[:, [5, 1]])
    assert np.abs(gf).min() > 0.01 and np.abs(gf).max() < 0.5  # a plausible switch


def test_a_dialect_without_the_key_refuses_before_sending_anything() -> None:
    with SimServer(personality="generic", time_scale=0.0, noise=False) as sim, \
            Analyzer(sim.tcp_resource, load_dialect("scpi-generic")) as an:
        an.configure(STIM)
        assert not an.reads_switch_terms
        count = sim.core.sweep_count
        with pytest.raises(DialectError) as info:
            an.sweep(["S11", "switch.forward"])
        assert sim.core.sweep_count == count  # no trigger was sent
        an.sweep(["S11"])
    message = str(info.value)
    assert message.endswith(": data.switch_terms is not given, so the analyzer's switch "
                            "terms (switch.forward) cannot be read")
    assert message.startswith("dialect ") and "\n" not in message


def _slots(sim: SimServer) -> list[str]:
    """What slots 1..6 hold, asked on the serial line while TCP holds the session."""
    other = Transport(sim.serial_resource, read_termination="\r\n")
    other.open()
    try:
        return [other.query(f"SLOT{n}:DEF?") for n in range(1, 7)]
    finally:
        other.close()


def test_slotted_defines_the_switch_slots_only_when_read_and_removes_them_on_close() -> None:
    """The normal capture path sends nothing new: slots 5 and 6 stay undefined until the
    switch terms are asked for; close removes them; after a reconnect (the opening
    presets the unit) they are defined again."""
    with SimServer(personality="slotted", serial=True, time_scale=0.0, noise=False) as sim:
        with Analyzer(sim.tcp_resource, load_dialect("slotted-blocks")) as an:
            an.configure(STIM)
            an.sweep(ALL[:4])
            assert _slots(sim) == ["S11", "S21", "S12", "S22", "NONE", "NONE"]
            an.sweep(ALL)
            assert _slots(sim) == ["S11", "S21", "S12", "S22", "A2B2", "A1B1"]
            an.reconnect()
            an.configure(STIM)
            _, data = an.sweep(["switch.forward"])
            an.check_errors("after the reconnect")
            assert np.array_equal(data[:, 0], sim.bench.switch_terms(
                np.linspace(STIM.start_hz, STIM.stop_hz, STIM.points))[0])
        assert _slots(sim) == ["NONE"] * 6


def test_switch_readings_carry_the_receiver_noise_relative_to_the_received_wave() -> None:
    """Noise on: with the thru in place each component of (reading − truth)·|S21m|/σ has a
    standard deviation of 1 (the bench's model; 2 × 2001 values: within 10 %); with loads
    at both ports (nothing joins them) the readings are mostly noise, far worse."""
    stim = Stimulus(10e6, 6e9, 2001, -10.0, 1e3)
    sigma = noise_sigma(-10.0, 1e3, 1)
    with SimServer(personality="slotted", time_scale=0.0, noise=True, seed=11) as sim:
        with Analyzer(sim.tcp_resource, load_dialect("slotted-blocks")) as an:
            an.configure(stim)
            sim.bench.connect("thru")
            freq, thru = an.sweep(["S21", "S12", *SWITCH_TERMS])
            sim.bench.connect("load")
            _, loads = an.sweep(["S21", "S12", *SWITCH_TERMS])
        truth = np.stack(sim.bench.switch_terms(freq), axis=1)
    scaled = (thru[:, 2:] - truth) * np.abs(thru[:, :2]) / sigma
    spread = np.std(np.concatenate([scaled.real.ravel(), scaled.imag.ravel()]))
    assert 0.9 < spread < 1.1
    good = np.median(np.abs(thru[:, 2:] - truth))
    assert np.median(np.abs(loads[:, 2:] - truth)) > 100 * good


@pytest.mark.parametrize(("personality", "dialect", "tokens"), [
    ("tabletop", "tabletop-ascii", ("MEASure:VALues? TERM2", "MEASure:VALues? TERM1")),
    ("slotted", "slotted-blocks", ("FETCh:SLOT? 5", "FETCh:SLOT? 6")),
])
def test_dialect_check_lists_and_walks_the_switch_terms(
        capsys: pytest.CaptureFixture, personality: str, dialect: str,
        tokens: tuple[str, str]) -> None:
    """Offline the two keys are listed with their commands; on the instrument both are read
    from the walk's sweep (402 values at its 201 points) and, with measurements, defined
    and removed again like the others; nothing fails."""
    from acquire.cli import main

    assert main(["dialect", "check", dialect]) == 0
    offline = capsys.readouterr().out
    for key, command in zip(("forward", "reverse"), tokens, strict=True):
        assert re.search(rf"data\.switch_terms\.{key} +'{re.escape(command)}' +reads the "
                         "switch term", offline)
    with SimServer(personality=personality, time_scale=0.0, noise=False) as sim:
        assert main(["dialect", "check", dialect, "--resource", sim.tcp_resource]) == 0
    walked = capsys.readouterr().out
    for key, command in zip(("forward", "reverse"), tokens, strict=True):
        assert f"ok   data.switch_terms.{key}: sent '{command}' -> '402 values: " in walked
    if personality == "slotted":
        assert "ok   measurement.define[switch.forward]: sent 'SLOT5:DEFine A2B2'" in walked
        assert "ok   measurement.cleanup[switch.reverse]: sent 'SLOT6:DELete'" in walked
    assert walked.rstrip().endswith("every command worked; the instrument is as it was found")


def test_a_switch_term_the_instrument_lacks_names_the_dialect_key(tmp_path: Path) -> None:
    """The generic personality knows no trace 'XF': it queues an error and answers nothing,
    and the timeout says which key of the dialect to check."""
    doc = mutated(GENERIC, TERMS, {"forward": "XF", "reverse": "XR"})
    path = write(tmp_path, doc, "wrong-tokens.yaml")
    with SimServer(personality="generic", time_scale=0.0, noise=False) as sim, \
            Analyzer(sim.tcp_resource, load_dialect(path), timeout_s=0.3) as an:
        an.configure(STIM)
        with pytest.raises(InstrumentTimeout) as info:
            an.sweep(["S11", "switch.forward"])
    message = str(info.value)
    assert "\n" not in message and "':TRAC:DATA? XF'" in message
    assert message.endswith(f"(reading switch.forward: check data.switch_terms.forward in "
                            f"dialect {path})")
