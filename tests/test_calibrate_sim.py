"""Guided calibration end to end against the simulated analyzer (TCP and pseudo-terminal).

The simulator's world is independent code (its own kit reader, error box and device
models), so "corrected reflection equals ``sim.bench.truth``" checks the whole chain:
prompts, standards, checks, solve, cal set file, ``sweepd run``.
"""

from __future__ import annotations

import io
import sys
from datetime import timedelta
from pathlib import Path

import numpy as np
import pytest

import acquire.utc
from acquire.calibration import CalSet, load_kit
from acquire.capture.session import Session
from acquire.cli import main
from acquire.errors import CalError
from acquire.guided import Aborted, Options, calibrate
from acquire.plan import load_plan
from simulators.bench import noise_sigma
from simulators.server import SimServer

ROOT = Path(__file__).resolve().parents[1]
PATCH = ROOT / "configs" / "plans" / "patch-line-a.yaml"


@pytest.fixture(scope="module")
def sim():
    with SimServer(personality="generic", serial=True, time_scale=0.0, noise=False) as server:
        yield server


@pytest.fixture(autouse=True)
def _device_back(sim: SimServer):
    yield
    sim.bench.set_device("patch-2g45")
    sim.bench.restore()
    sim.bench.connect("device")


def _plan(tmp_path: Path, name: str = "patch-test", *, measure: str = "[S11]",
          calibration: str = "method: one-port", points: int = 201,
          power: str = "-10 dBm", start: str = "2.30 GHz", stop: str = "2.60 GHz") -> Path:
    path = tmp_path / f"{name}-{points}-{abs(hash((measure, calibration, power)))}.yaml"
    path.write_text(
        f"plan: {name}\n"
        "instrument: {resource: 'TCPIP::127.0.0.1::5025::SOCKET', dialect: scpi-generic}\n"
        f"stimulus: {{start: {start}, stop: {stop}, points: {points}, power: {power}, "
        "if_bandwidth: 1 kHz}\n"
        f"measure: {measure}\n"
        "calibration:\n"
        + "".join(f"  {line}\n" for line in calibration.splitlines())
        + "  kit: generic-sma-50\n"
        "  reference_plane: end of the test cable\n"
        f"output: {{dir: {tmp_path / 'out'}}}\n"
    )
    return path


def _cal(plan_path: Path, sim: SimServer, out: Path, **options) -> tuple:
    text = io.StringIO()
    options.setdefault("resource", sim.tcp_resource)
    options.setdefault("script", "")
    assert load_plan(plan_path).output.dir == out  # the cal store: <plan's output>/cal
    outcome = calibrate(load_plan(plan_path), Options(**options), stdout=text)
    return outcome, text.getvalue()


def _device_error(plan_path: Path, sim: SimServer, calset: CalSet, resource: str
                  ) -> tuple[float, float]:
    """(max |corrected − truth|, max |raw − truth|) of S11 of the device in the fixture."""
    sim.bench.connect("device")
    with Session(load_plan(plan_path), resource) as session:
        raw = session.measure()
    truth = sim.bench.truth(raw.freq_hz)[:, 0, 0]
    corrected = calset.correct(raw).param("S11")
    return float(np.abs(corrected - truth).max()), float(np.abs(raw.param("S11") - truth).max())


@pytest.mark.parametrize("link", ["tcp", "serial"])
def test_scripted_one_port_corrects_the_device_to_its_truth(sim: SimServer, tmp_path: Path,
                                                            link: str) -> None:
    resource = sim.tcp_resource if link == "tcp" else sim.serial_resource
    plan_path = _plan(tmp_path)
    outcome, text = _cal(plan_path, sim, tmp_path / "out", resource=resource)
    assert outcome.exit_code == 0 and outcome.saved is not None
    assert outcome.saved.parent == tmp_path / "out" / "cal"
    calset = CalSet.load(outcome.saved)
    assert calset.reference_plane == "end of the test cable"
    corrected, raw = _device_error(plan_path, sim, calset, resource)
    assert corrected < 1e-3  # requirement: within 1e-3 of the simulator's truth, noise off
    assert raw > 0.1  # uncorrected data is clearly worse
    assert "[3/3] LOAD  ✓open  ✓short  ·load" in text
    assert "effective directivity -40.0 dB" in text


def test_saved_terms_agree_with_scikit_rf(sim: SimServer, tmp_path: Path) -> None:
    """Oracle: scikit-rf's OnePort solved from the saved raw readings and the kit models."""
    import skrf as rf
    from skrf.calibration import OnePort

    outcome, _ = _cal(_plan(tmp_path), sim, tmp_path / "out")
    cal = CalSet.load(outcome.saved)
    kit = load_kit("generic-sma-50")
    freq = rf.Frequency.from_f(cal.freq_hz, unit="Hz")

    def net(s: np.ndarray) -> rf.Network:
        return rf.Network(frequency=freq, s=np.asarray(s).reshape(-1, 1, 1), z0=50)

    names = ("open", "short", "load")
    oracle = OnePort(measured=[net(cal.raw[f"{n}.S11"]) for n in names],
                     ideals=[net(kit.reflection(n, cal.freq_hz)) for n in names])
    oracle.run()
    terms = cal.model.reflection["S11"]
    for ours, theirs in ((terms.directivity, "directivity"), (terms.source_match, "source match"),
                         (terms.reflection_tracking, "reflection tracking")):
        assert np.abs(ours - oracle.coefs[theirs]).max() < 1e-12  # reference tolerance


def test_noise_on_stays_within_the_stated_bound(tmp_path: Path) -> None:
    """Noise on (receiver floor −90 dB at 0 dBm, 1 kHz; the plan sweeps at −10 dBm).

    Stated bound: 20·σ/min|e10e01|. A raw value's noise σ per component, divided by the
    reflection tracking, is the corrected reading's noise per component; the DUT and the
    three standards each add about that much, and the worst of 201 points lies within
    about 4 standard deviations, so 20σ/|e10e01| (≈ 1.9e-3 here) holds with margin.
    """
    with SimServer(personality="generic", time_scale=0.0, noise=True, seed=7) as noisy:
        plan_path = _plan(tmp_path)
        outcome, _ = _cal(plan_path, noisy, tmp_path / "out")
        freq = np.linspace(2.3e9, 2.6e9, 201)
        tracking = np.abs(noisy.bench.error_terms(freq)["e10e01"]).min()
        bound = 20 * noise_sigma(-10.0, 1e3, 1) / tracking
        corrected, raw = _device_error(plan_path, noisy, outcome.calset, noisy.tcp_resource)
    assert corrected < bound < 3e-3
    assert raw > 100 * bound


@pytest.mark.parametrize("link", ["tcp", "serial"])
def test_cli_calibrate_then_run_writes_corrected_touchstone(sim: SimServer, tmp_path: Path,
                                                            capsys: pytest.CaptureFixture,
                                                            link: str) -> None:
    from acquire.touchstone import read_touchstone

    resource = sim.tcp_resource if link == "tcp" else sim.serial_resource
    out = tmp_path / "out"
    patch = tmp_path / "plans" / "patch-line-a.yaml"  # its output.dir: plans/results/...
    patch.parent.mkdir()
    patch.write_text(PATCH.read_text())
    assert main(["calibrate", str(patch), "--resource", resource,
                 "--prompt", "switch", "--verify", "load"]) == 0
    text = capsys.readouterr().out
    assert "verification passed" in text and "fixture switched back to the device" in text
    assert list((patch.parent / "results" / "patch-line-a" / "cal").glob("*.calset"))
    assert main(["run", str(patch), "--resource", resource, "--output", str(out)]) == 0
    (path,) = out.glob("*.s1p")
    got = read_touchstone(path).to_sweep()
    truth = sim.bench.truth(got.freq_hz)[:, 0, 0]
    assert np.abs(got.param("S11") - truth).max() < 1e-3
    with Session(load_plan(PATCH), resource) as session:
        raw = session.measure().param("S11")
    assert np.abs(raw - truth).max() > 0.1


def test_run_refuses_a_stale_or_mismatched_cal_set(sim: SimServer, tmp_path: Path,
                                                   capsys: pytest.CaptureFixture) -> None:
    out = tmp_path / "out"
    stale = _plan(tmp_path, "aging", calibration="method: one-port\nmax_age: 1 s")
    _cal(stale, sim, out)
    # two seconds later, by an injected clock rather than by sleeping past the window
    later = acquire.utc.utc_now() + timedelta(seconds=2)
    previous = acquire.utc.set_clock(lambda: later)
    try:
        assert main(["run", str(stale), "--resource", sim.tcp_resource,
                     "--output", str(out)]) == 2
    finally:
        acquire.utc.set_clock(previous)
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert "old (max 1 s)" in err and "sweepd calibrate" in err

    made = _plan(tmp_path, "grid", points=201)
    _cal(made, sim, out)
    other = _plan(tmp_path, "grid", points=101)  # same plan name, another grid
    assert main(["run", str(other), "--resource", sim.tcp_resource, "--output", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert "201 points" in err and "101 points" in err and "sweepd calibrate" in err


def test_abort_halfway_leaves_no_cal_set_and_resume_finishes(sim: SimServer,
                                                             tmp_path: Path) -> None:
    plan_path = _plan(tmp_path)
    out = tmp_path / "out"
    with pytest.raises(Aborted, match=r"aborted at LOAD.*kept in .*--resume"):
        _cal(plan_path, sim, out, script="open short a")
    assert list((out / "cal").glob("*.calset")) == []
    partial = out / "cal" / "patch-test.partial-cal"
    assert partial.is_file()

    outcome, text = _cal(plan_path, sim, out, resume=True)
    assert "Resuming: OPEN, SHORT already measured" in text
    assert text.count(" connected") == 2  # the load, then back to the device
    assert not partial.exists()
    assert _device_error(plan_path, sim, outcome.calset, sim.tcp_resource)[0] < 1e-3


def test_resume_is_refused_when_the_setup_changed(sim: SimServer, tmp_path: Path) -> None:
    out = tmp_path / "out"
    with pytest.raises(Aborted):
        _cal(_plan(tmp_path, power="-10 dBm"), sim, out, script="open a")
    with pytest.raises(CalError, match=r"cannot resume .*another stimulus; run without --resume"):
        _cal(_plan(tmp_path, power="-5 dBm"), sim, out, resume=True)
    outcome, text = _cal(_plan(tmp_path, power="-5 dBm"), sim, out)  # starting over works
    assert "this run starts over" in text and outcome.exit_code == 0


def test_open_short_swap_is_caught_against_the_last_cal(sim: SimServer, tmp_path: Path) -> None:
    plan_path, out = _plan(tmp_path), tmp_path / "out"
    _cal(plan_path, sim, out)
    outcome, text = _cal(plan_path, sim, out, script="short 2 open")
    assert "the standard on the OPEN step looks like a SHORT" in text
    assert "open and short look swapped compared with the last calibration" in text
    assert outcome.calset.figures["failed_attempts"]["open"] >= 1
    assert _device_error(plan_path, sim, outcome.calset, sim.tcp_resource)[0] < 1e-3


def test_open_on_the_load_step_is_named(sim: SimServer, tmp_path: Path) -> None:
    outcome, text = _cal(_plan(tmp_path), sim, tmp_path / "out", script="open short open")
    assert "the same standard was connected twice (the LOAD step looks like an OPEN" in text
    assert "Repeat: LOAD, OPEN." in text  # the likely culprit first
    assert text.count("open connected") == 2  # so OPEN is not measured a second time
    assert outcome.exit_code == 0


def _relay(tmp_path: Path, sim: SimServer, body: str) -> str:
    """A relay driver program (a real process per step) talking to the simulator."""
    host, port = sim.control_address
    script = tmp_path / "relay.py"
    script.write_text(
        "import pathlib, sys\n"
        f"sys.path.insert(0, {str(ROOT)!r})\n"
        "from simulators.control import main\n"
        f"ADDRESS = {f'{host}:{port}'!r}\n"
        f"MARKER = pathlib.Path({str(tmp_path / 'failed-once')!r})\n"
        + body
    )
    return f"{sys.executable} {script} {{standard}}"


def test_unattended_gives_up_on_a_miswired_fixture(sim: SimServer, tmp_path: Path) -> None:
    command = _relay(tmp_path, sim, "sys.exit(main([ADDRESS, 'connect', 'short']))\n")
    out = tmp_path / "out"
    with pytest.raises(Aborted, match=r"gave up after 2 failed attempts: .*read the same"):
        _cal(_plan(tmp_path), sim, out, script=None, prompt="command", switch_command=command,
             retries=1)
    assert list((out / "cal").glob("*.calset")) == []


def test_changed_setup_can_be_accepted_with_the_ignore_key(sim: SimServer,
                                                           tmp_path: Path) -> None:
    plan_path, out = _plan(tmp_path), tmp_path / "out"
    _cal(plan_path, sim, out)
    sim.bench.disturb(delay_s=60e-12, z_ohm=50.0, loss_db_at_1ghz=0.0)  # an added adapter
    outcome, text = _cal(plan_path, sim, out, script="open i")
    assert "press i (or run with --no-compare) to stop comparing" in text
    assert "no longer comparing with the last calibration" in text
    assert outcome.exit_code == 0 and outcome.calset.figures["previous_cal"] is None
    assert _device_error(plan_path, sim, outcome.calset, sim.tcp_resource)[0] < 1e-3


def test_switch_command_backend_and_a_failing_relay(sim: SimServer, tmp_path: Path) -> None:
    """The command backend runs a real program per step; a failure is retried."""
    command = _relay(tmp_path, sim, (
        "if sys.argv[1] == 'short' and not MARKER.exists():\n"
        "    MARKER.touch()\n"
        "    print('relay K2 did not close', file=sys.stderr)\n"
        "    sys.exit(3)\n"
        "sys.exit(main([ADDRESS, 'connect', sys.argv[1]]))\n"))
    plan_path = _plan(tmp_path, calibration=f'method: one-port\nswitch: {{command: "{command}"}}')
    assert load_plan(plan_path).calibration.prompt == "command"
    outcome, text = _cal(plan_path, sim, tmp_path / "out", script=None)
    assert "failed with exit status 3: relay K2 did not close" in text
    assert "Fix the fixture, then press Enter to try again." in text
    assert outcome.exit_code == 0
    assert sim.bench.connected == "device"  # switched back at the end
    assert _device_error(plan_path, sim, outcome.calset, sim.tcp_resource)[0] < 1e-3


def test_verification_device_against_its_reference_file(sim: SimServer, tmp_path: Path) -> None:
    """A 25 Ω check standard: Γ = (Z − Z0)/(Z + Z0) = −1/3 (Pozar, Microwave Engineering,
    4th ed., ch. 2); a reference claiming 100 Ω (Γ = +1/3) must fail."""
    from acquire.sweep import Sweep
    from acquire.touchstone import TouchstoneOptions, write_touchstone

    sim.bench.set_device("check-25ohm")
    freq = np.linspace(2.2e9, 2.7e9, 51)  # coarser and wider than the plan: interpolated

    def reference(gamma: float, name: str) -> Path:
        sweep = Sweep(freq, np.full(freq.size, gamma, complex).reshape(-1, 1, 1), (50.0,))
        return write_touchstone(tmp_path / name, sweep, TouchstoneOptions(precision=17))

    plan_path = _plan(tmp_path)
    good = reference((25 - 50) / (25 + 50), "check-25.s1p")
    outcome, text = _cal(plan_path, sim, tmp_path / "out", verify=str(good))
    assert "verification passed" in text
    assert outcome.verification.passed and outcome.verification.worst_error < 1e-9
    assert outcome.calset.figures["verification"]["passed"] is True

    wrong = reference((100 - 50) / (100 + 50), "check-100.s1p")
    before = set((tmp_path / "out" / "cal").glob("*.calset"))
    outcome, text = _cal(plan_path, sim, tmp_path / "out", verify=str(wrong), retries=1)
    assert "verification FAILED" in text
    assert outcome.exit_code == 1 and outcome.saved is None
    assert set((tmp_path / "out" / "cal").glob("*.calset")) == before


def test_one_path_two_port_with_a_missing_thru(sim: SimServer, tmp_path: Path) -> None:
    sim.bench.set_device("cable-1m")
    plan_path = _plan(tmp_path, "cable-test", measure="two-port",
                      calibration="method: one-path-two-port", start="10 MHz", stop="3 GHz")
    outcome, text = _cal(plan_path, sim, tmp_path / "out", script="open short load load")
    assert "the THRU step reads S21 at" in text and "nothing seems to join the ports" in text
    assert outcome.exit_code == 0
    sim.bench.connect("device")
    with Session(load_plan(plan_path), sim.tcp_resource) as session:
        raw = session.measure()
    truth = sim.bench.truth(raw.freq_hz)
    corrected = outcome.calset.correct(raw)
    # Enhanced response neglects the load match of port 2 (reference note §12), so the
    # correction is approximate; it must still be far better than raw data.
    err_c = np.abs(corrected.param("S21") - truth[:, 1, 0]).max()
    err_r = np.abs(raw.param("S21") - truth[:, 1, 0]).max()
    assert err_c < 0.1 < err_r
    assert err_c < err_r / 5


def test_response_method_says_what_stays_uncorrected(sim: SimServer, tmp_path: Path) -> None:
    plan_path = _plan(tmp_path, calibration="method: open-normalisation")
    outcome, text = _cal(plan_path, sim, tmp_path / "out")
    assert "[1/1] OPEN" in text
    assert "leaves directivity and source match uncorrected" in text
    corrected, raw = _device_error(plan_path, sim, outcome.calset, sim.tcp_resource)
    assert corrected < raw / 5


@pytest.mark.parametrize(("args", "expected"), [
    (["--script", "open,bogus"], "--script: item 2 'bogus' is not a standard"),
    (["--prompt", "command"], "--prompt command needs calibration.switch.command"),
    (["--verify", "missing.s1p"], "--verify missing.s1p: no such Touchstone file"),
    (["--verify-tolerance", "0.1"], "--verify-tolerance needs --verify"),
])
def test_user_errors_are_one_line(sim: SimServer, tmp_path: Path, capsys: pytest.CaptureFixture,
                                  args: list[str], expected: str) -> None:
    code = main(["calibrate", str(PATCH), "--resource", sim.tcp_resource, *args])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and err.startswith("sweepd: error: ") and expected in err


def test_plans_that_cannot_be_calibrated(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    whip = ROOT / "configs" / "plans" / "whip-915.yaml"
    assert main(["calibrate", str(whip)]) == 2
    assert "no calibration section" in capsys.readouterr().err
    thru_on_one_port = _plan(tmp_path, calibration="method: transmission-normalisation")
    assert main(["calibrate", str(thru_on_one_port)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "needs a thru between two ports" in err


def test_tabletop_dialect_over_serial_with_its_own_switch(tmp_path: Path) -> None:
    """Another dialect (ASCII dB,deg data, its own switch command) over a pseudo-terminal."""
    with SimServer(personality="tabletop", tcp_port=None, serial=True, time_scale=0.0) as table:
        plan_path = _plan(tmp_path)
        text = plan_path.read_text().replace("dialect: scpi-generic", "dialect: tabletop-ascii")
        plan_path.write_text(text)
        outcome, out = _cal(plan_path, table, tmp_path / "out", resource=table.serial_resource,
                            prompt="switch", script=None)
        assert "by the analyzer's standard switch (tabletop-ascii)" in out
        corrected, raw = _device_error(plan_path, table, outcome.calset, table.serial_resource)
    assert corrected < 1e-3 and raw > 0.1


def test_confirm_asks_before_each_switched_step(sim: SimServer, tmp_path: Path) -> None:
    keys = io.StringIO("\n" * 3 + "b\n" + "\n" * 2)  # 3 steps, back from SAVE, LOAD, save
    text = io.StringIO()
    outcome = calibrate(load_plan(_plan(tmp_path)),
                        Options(resource=sim.tcp_resource, prompt="switch", confirm=True),
                        stdin=keys, stdout=text)
    assert outcome.exit_code == 0
    out = text.getvalue()
    assert out.count("Enter connects the") == 4 and out.count("> ") == 6
    assert out.count("load connected") == 2


def test_transmission_normalisation_of_a_cable(sim: SimServer, tmp_path: Path) -> None:
    sim.bench.set_device("cable-1m")
    plan_path = _plan(tmp_path, "cable-thru", measure="two-port",
                      calibration="method: transmission-normalisation", start="10 MHz",
                      stop="3 GHz")
    outcome, text = _cal(plan_path, sim, tmp_path / "out")
    assert "[1/1] THRU  ·thru" in text and "thru connected" in text
    assert outcome.calset.model.params == ("S21",)
    sim.bench.connect("device")
    with Session(load_plan(plan_path), sim.tcp_resource) as session:
        raw = session.measure()
    truth = sim.bench.truth(raw.freq_hz)[:, 1, 0]
    corrected = outcome.calset.correct(raw)
    # Response normalisation leaves source and load match (reference note §12): approximate.
    err_c = np.abs(corrected.param("S21") - truth).max()
    assert err_c < np.abs(raw.param("S21") - truth).max() / 5
    np.testing.assert_array_equal(corrected.param("S11"), raw.param("S11"))  # left raw
