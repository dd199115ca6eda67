"""The shipped cable-assembly plan end to end: ``sweepd calibrate`` (full two-port with
isolation) and ``sweepd run`` against the simulator over TCP and a pseudo-terminal; the
corrected S2P must match ``sweepd sim truth`` of the same device.

The simulator's world is independent code (its own kit reader, 8-term error box with
switch terms, device models); the truth file is written by the simulator itself and
read here by scikit-rf, so the chain plan → prompts → standards → solve → cal set →
correction → Touchstone writer is checked against an outside reader.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np
import pytest
import skrf as rf

from acquire.cli import main
from acquire.errors import CalError
from acquire.guided import Options, calibrate
from acquire.plan import load_plan
from simulators.bench import noise_sigma
from simulators.server import SimServer

ROOT = Path(__file__).resolve().parents[1]
PLAN = ROOT / "configs" / "plans" / "cable-assembly.yaml"


@pytest.fixture(scope="module")
def sim():
    with SimServer(personality="generic", serial=True, time_scale=0.0, noise=False) as server:
        server.bench.set_device("cable-1m")
        yield server


def _plan_copy(tmp_path: Path, points: int | None = None) -> Path:
    plan = tmp_path / "plans" / "cable-assembly.yaml"
    plan.parent.mkdir(parents=True, exist_ok=True)
    text = PLAN.read_text()
    if points is not None:
        text = text.replace("points: 401", f"points: {points}")
    plan.write_text(text)
    return plan


def _truth(tmp_path: Path, points: int = 401) -> rf.Network:
    out = tmp_path / "truth.s2p"
    assert main(["sim", "truth", "--device", "cable-1m", "--start", "10 MHz", "--stop",
                 "6 GHz", "--points", str(points), "-o", str(out)]) == 0
    return rf.Network(str(out))


@pytest.mark.parametrize("link", ["tcp", "serial"])
def test_calibrate_and_run_the_cable_plan_match_the_truth_file(
        sim: SimServer, tmp_path: Path, capsys: pytest.CaptureFixture, link: str) -> None:
    resource = sim.tcp_resource if link == "tcp" else sim.serial_resource
    points = 401 if link == "tcp" else 101  # the pseudo-terminal is slower: fewer points
    plan = _plan_copy(tmp_path, points)
    truth = _truth(tmp_path, points)
    assert main(["calibrate", str(plan), "--resource", resource, "--prompt", "switch"]) == 0
    text = capsys.readouterr().out
    assert "[8/8] THRU" in text and "ISOLATION (loads at both ports)" in text
    assert "error terms solved (two-port) and plausible" in text
    out = tmp_path / "out"
    assert main(["run", str(plan), "--resource", resource, "--output", str(out)]) == 0
    assert "PASS 4/4 checks pass" in capsys.readouterr().out
    (path,) = out.glob("*.s2p")
    got = rf.Network(str(path))
    assert np.array_equal(got.f, truth.f)
    assert np.abs(got.s - truth.s).max() < 1e-9
    raw = sim.bench.sweep(truth.f)
    assert np.abs(raw - truth.s).max() > 0.1  # the raw data are far off


def test_with_noise_the_corrected_file_stays_within_the_stated_bound(tmp_path: Path) -> None:
    """Noise on: every corrected value within 12σ/min|tracking| of the truth (the bound of
    tests/test_sim_twoport.py, σ from the bench's noise model at the plan's power and IF
    bandwidth)."""
    with SimServer(personality="generic", time_scale=0.0, noise=True, seed=3) as noisy:
        noisy.bench.set_device("cable-1m")
        plan = _plan_copy(tmp_path, 201)
        outcome = calibrate(load_plan(plan), Options(resource=noisy.tcp_resource,
                                                     prompt="switch"), stdout=io.StringIO())
        assert outcome.exit_code == 0
        out = tmp_path / "out"
        assert main(["run", str(plan), "--resource", noisy.tcp_resource, "--output",
                     str(out)]) == 0
        terms = noisy.bench.error_terms(np.linspace(10e6, 6e9, 201))
    truth = _truth(tmp_path, 201)
    (path,) = out.glob("*.s2p")
    err = np.abs(rf.Network(str(path)).s - truth.s).max()
    tracking = min(np.abs(terms[k]).min() for k in ("e10e01", "e23e32r", "e10e32", "e23e01r"))
    sigma = noise_sigma(-10.0, 1e3, 1)
    assert 0.1 * sigma < err < 12 * sigma / tracking


def test_plausibility_a_thru_left_out_and_a_thru_left_in(sim: SimServer, tmp_path: Path
                                                         ) -> None:
    """Scripted technician: the THRU step sees loads (no thru), the ISOLATION step sees the
    thru; each is flagged and repeated, and the cal set still comes out right."""
    plan = _plan_copy(tmp_path, 101)
    script = "open short load open short load thru load load thru"
    text = io.StringIO()
    outcome = calibrate(load_plan(plan), Options(resource=sim.tcp_resource, script=script),
                        stdout=text)
    said = text.getvalue()
    assert "the ISOLATION (loads at both ports) step reads S21 at" in said
    assert "something joins the ports" in said
    assert "the THRU step reads S21 at" in said and "nothing seems to join the ports" in said
    assert outcome.exit_code == 0
    truth = _truth(tmp_path, 101)
    sim.bench.connect("device")
    from acquire.capture.session import Session

    with Session(load_plan(plan), sim.tcp_resource) as session:
        raw = session.measure()
    corrected = outcome.calset.correct(raw)
    assert np.abs(corrected.s - truth.s).max() < 1e-9


def test_verification_with_a_two_port_check_device(sim: SimServer, tmp_path: Path) -> None:
    """An attenuator as check device: its truth file verifies all four parameters; a
    reference of another attenuation fails (S21 named) and no cal set is saved."""
    plan = _plan_copy(tmp_path, 101)
    good, wrong = tmp_path / "pad10.s2p", tmp_path / "pad6.s2p"
    for path, db in ((good, 10), (wrong, 6)):
        assert main(["sim", "truth", "--device", "attenuator", "--param",
                     f"attenuation_db={db}", "--start", "10 MHz", "--stop", "6 GHz",
                     "--points", "101", "-o", str(path)]) == 0
    sim.bench.set_device("attenuator-10db")
    try:
        text = io.StringIO()
        outcome = calibrate(load_plan(plan), Options(resource=sim.tcp_resource,
                                                     prompt="switch", verify=str(good)),
                            stdout=text)
        assert outcome.exit_code == 0, text.getvalue()
        assert outcome.verification.passed and outcome.verification.worst_error < 1e-9
        text = io.StringIO()
        outcome = calibrate(load_plan(plan), Options(resource=sim.tcp_resource, script="",
                                                     verify=str(wrong), retries=1),
                            stdout=text)
        assert outcome.exit_code == 1 and outcome.saved is None
        assert "verification FAILED" in text.getvalue()
        assert outcome.verification.name.endswith(" S21")
        one_port = tmp_path / "one.s1p"
        assert main(["sim", "truth", "--device", "check-25ohm", "--start", "10 MHz", "--stop",
                     "6 GHz", "--points", "101", "-o", str(one_port)]) == 0
        with pytest.raises(CalError, match=r"give an \.s2p file"):
            calibrate(load_plan(plan), Options(resource=sim.tcp_resource, prompt="switch",
                                               verify=str(one_port)), stdout=io.StringIO())
    finally:
        sim.bench.set_device("cable-1m")


def test_command_backend_is_told_the_port(sim: SimServer, tmp_path: Path) -> None:
    """A relay program per step, given {standard} and {port}: port-1 standards, port-2
    standards, loads on both for isolation, the thru on both, the device at the end."""
    import sys

    host, port = sim.control_address
    log = tmp_path / "relay.log"
    relay = tmp_path / "relay.py"
    relay.write_text(
        "import sys\n"
        f"sys.path.insert(0, {str(ROOT)!r})\n"
        "from simulators.control import main\n"
        f"with open({str(log)!r}, 'a') as fh:\n"
        "    fh.write(' '.join(sys.argv[1:]) + '\\n')\n"
        f"sys.exit(main([{f'{host}:{port}'!r}, 'connect', sys.argv[1]]))\n")
    plan = _plan_copy(tmp_path, 101)
    text = plan.read_text().replace(
        "  isolation: true", "  isolation: true\n  switch: {command: \""
        f"{sys.executable} {relay} {{standard}} {{port}}\"}}")
    plan.write_text(text)
    assert load_plan(plan).calibration.prompt == "command"
    outcome = calibrate(load_plan(plan), Options(resource=sim.tcp_resource),
                        stdout=io.StringIO())
    assert outcome.exit_code == 0
    assert log.read_text().splitlines() == [
        "open 1", "short 1", "load 1", "open 2", "short 2", "load 2", "load both",
        "thru both", "device both"]
    truth = _truth(tmp_path, 101)
    sim.bench.connect("device")
    from acquire.capture.session import Session

    with Session(load_plan(plan), sim.tcp_resource) as session:
        raw = session.measure()
    assert np.abs(outcome.calset.correct(raw).s - truth.s).max() < 1e-9


def test_two_port_through_the_tabletop_personality_over_serial(tmp_path: Path) -> None:
    """The other personality measures through the same bench, so it shows the same
    two-port error box. Its ASCII transfer rounds to 1e-6 dB and 1e-6 degree (about
    1.2e-7 relative per raw value), which bounds the agreement with the truth: < 1e-6."""
    plan = _plan_copy(tmp_path, 51)
    plan.write_text(plan.read_text().replace("dialect: scpi-generic", "dialect: tabletop-ascii"))
    with SimServer(personality="tabletop", tcp_port=None, serial=True, time_scale=0.0,
                   noise=False) as table:
        table.bench.set_device("attenuator-10db")
        outcome = calibrate(load_plan(plan), Options(resource=table.serial_resource,
                                                     prompt="switch"), stdout=io.StringIO())
        assert outcome.exit_code == 0
        table.bench.connect("device")
        from acquire.capture.session import Session

        with Session(load_plan(plan), table.serial_resource) as session:
            raw = session.measure()
        truth = table.bench.truth(raw.freq_hz)
    err = np.abs(outcome.calset.correct(raw).s - truth).max()
    assert err < 1e-6
    assert np.abs(raw.s - truth).max() > 0.1
