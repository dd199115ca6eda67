"""The station guards against the operator's mistakes and tells the line what happened:
a unit that was not swapped, a failing unit explained in words with a small plot, line
hooks (stack light, buzzer) run without a shell, failing hooks that never stop the line.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
from test_station_e2e import golden_ok, start, unit
from test_station_support import BAD, GOOD, install_cal, rows, write_plan

from acquire.errors import ConfigError
from acquire.plan import load_plan
from acquire.station.config import station_config
from acquire.station.swap import SwapGuard, noise_sigma, same_unit
from acquire.sweep import Sweep
from simulators.server import SimServer


@pytest.fixture
def sim():
    with SimServer(serial=False, time_scale=0.0, noise=False) as server:
        yield server


# -- same unit within noise (numbers only) --------------------------------------------------

F = np.linspace(2.3e9, 2.6e9, 601)


def patch(f0=2.45e9, r=45.0, q=12.0):
    ind = q * r / (2 * np.pi * f0)
    cap = 1 / ((2 * np.pi * f0) ** 2 * ind)
    w = 2 * np.pi * F
    z = r + 1j * (w * ind - 1 / (w * cap))
    return (z - 50) / (z + 50)


def noisy(g, sigma, seed):
    rng = np.random.default_rng(seed)
    return g + sigma * (rng.standard_normal(g.size) + 1j * rng.standard_normal(g.size))


def test_noise_estimate_from_second_differences():
    # white complex noise of sigma per component on a smooth trace: recovered within 10 %
    for sigma in (1e-4, 1e-3):
        assert noise_sigma(noisy(patch(), sigma, 3)) == pytest.approx(sigma, rel=0.1)
    assert noise_sigma(patch()) < 1e-5  # the curvature of a smooth trace stays far below


def test_same_unit_within_noise_and_different_units():
    a, b = Sweep(F, noisy(patch(), 1e-4, 1)), Sweep(F, noisy(patch(), 1e-4, 2))
    assert same_unit(a, b)[0]  # one unit, two sweeps (trace noise -80 dB)
    other = Sweep(F, noisy(patch(f0=2.451e9), 1e-4, 2))  # resonance 1 MHz away
    assert not same_unit(a, other)[0]
    # with ten times the noise a 1 MHz shift is within noise; 5 MHz is not
    loud = Sweep(F, noisy(patch(), 1e-3, 1))
    assert same_unit(loud, Sweep(F, noisy(patch(f0=2.451e9), 1e-3, 2)))[0]
    assert not same_unit(loud, Sweep(F, noisy(patch(f0=2.455e9), 1e-3, 2)))[0]
    assert same_unit(Sweep(F, patch()), Sweep(F, patch()))[0]  # noise-free, identical
    assert not same_unit(Sweep(F, patch()), Sweep(F, patch(r=45.5)))[0]
    assert not same_unit(Sweep(F, patch()), Sweep(F[:-1], patch()[:-1]))[0]  # other grid


def test_guard_compares_with_the_last_unit_and_the_golden():
    guard = SwapGuard()
    guard.remember_golden("GOLDEN", Sweep(F, patch()))
    assert "golden unit GOLDEN" in guard.suspect("PA-0001", Sweep(F, patch()))
    guard.remember("PA-0001", Sweep(F, patch(f0=2.46e9)))
    assert "PA-0001, the unit measured just before" in guard.suspect(
        "PA-0002", Sweep(F, patch(f0=2.46e9)))
    assert guard.suspect("PA-0001", Sweep(F, patch(f0=2.46e9))) is None  # a retest
    assert guard.suspect("PA-0002", Sweep(F, patch(f0=2.44e9))) is None


# -- on the line (simulator, real station process) -----------------------------------------


def test_a_unit_not_swapped_is_caught_and_not_stored(sim, tmp_path):
    out = tmp_path / "out"
    install_cal(out)
    plan = write_plan(tmp_path, sim.tcp_resource)
    with start(plan) as st:
        golden_ok(st, sim)
        st.send(GOOD[0])  # the golden unit is still on the fixture
        text = st.expect("swapped? y/n> ")
        assert "WARNING: was the unit swapped? this sweep is identical within noise to the " \
               "golden unit GOLDEN" in text
        st.send("n")
        assert f"{GOOD[0]} was NOT stored" in st.expect("serial> ")
        assert f"{GOOD[0]}: PASS" in unit(st, sim, GOOD[0])
        st.send(GOOD[1])  # scanned, but GOOD[0] left on the fixture
        assert f"identical within noise to {GOOD[0]}" in st.expect("swapped? y/n> ")
        st.send("y")  # the operator insists: kept
        assert f"{GOOD[1]}: PASS" in st.expect("serial> ")
        st.send("q")
        assert st.wait() == 0
    got = rows(out, "SELECT serial, state, note FROM measurements WHERE golden = 0 ORDER BY id")
    assert [(r["serial"], r["state"]) for r in got] == [
        (GOOD[0], "missed"), (GOOD[0], "stored"), (GOOD[1], "stored")]
    assert "not stored: the operator said the unit was not swapped" in got[0]["note"]


def hook_script(tmp_path: Path, name: str, status: int = 0) -> Path:
    """A hook program that appends its arguments to a log (and exits with ``status``)."""
    script = tmp_path / name
    log = str(tmp_path / "hooks.log")
    script.write_text(f"#!{sys.executable}\nimport sys\n"
                      f"open({log!r}, 'a').write(repr(sys.argv[1:]) + '\\n')\n"
                      f"sys.stderr.write('lamp driver says no\\n') if {status} else None\n"
                      f"sys.exit({status})\n")
    script.chmod(0o755)
    return script


def test_fail_shows_why_saves_a_plot_and_runs_the_hooks(sim, tmp_path):
    out = tmp_path / "out"
    install_cal(out)
    light, bad = hook_script(tmp_path, "light"), hook_script(tmp_path, "broken", status=3)
    hooks = {"pass": [str(light), "green", "{serial}"],
             "fail": [str(light), "red", "{serial}", "{verdict}", "{plot}"],
             "line_stopped": [str(bad), "{reason}"],
             "line_resumed": [str(light), "resumed", "; rm -rf / $(reboot)"]}
    plan = write_plan(tmp_path, sim.tcp_resource,
                      station={"golden": {"every_units": 2}, "hooks": hooks})
    with start(plan) as st:
        golden_ok(st, sim)
        unit(st, sim, GOOD[0])
        text = unit(st, sim, BAD[0], "golden> ")
        assert f"{BAD[0]}: FAIL" in text
        why = next(line for line in text.splitlines() if "WHY:" in line)
        assert "WHY: S11 SWR is" in why and "limit 2.000 of mask patch-2g45" in why
        plot = Path(next(line.split("file ", 1)[1] for line in text.splitlines()
                         if line.strip().startswith("file ") and line.endswith(".png")))
        assert plot.parent == out and plot.read_bytes().startswith(b"\x89PNG")
        sim.bench.disturb()
        sim.bench.select_unit("GOLDEN")
        st.send("")
        text = st.expect("stopped> ")
        assert "note: hook line_stopped (broken) exited with status 3: lamp driver says no" \
            in text
        sim.bench.restore()
        st.send("g")
        st.expect("golden> ")
        st.send("")
        assert "GOLDEN CHECK PASSED" in st.expect("serial> ")
        assert f"{GOOD[1]}: PASS" in unit(st, sim, GOOD[1])  # measuring went on
        st.send("q")
        assert st.wait() == 0
    log = [eval(line) for line in (tmp_path / "hooks.log").read_text().splitlines()]
    assert log[0] == ["green", GOOD[0]]
    assert log[1] == ["red", BAD[0], "fail", str(plot)]
    assert log[2][0].startswith("golden unit GOLDEN is OUT OF TOLERANCE")  # the failing hook
    assert log[3] == ["resumed", "; rm -rf / $(reboot)"]  # no shell: text stays text
    assert log[4] == ["green", GOOD[1]]
    faults = rows(out, "SELECT kind, action FROM faults ORDER BY id")
    assert ("HookFailed", "measuring goes on") in [tuple(f) for f in faults]


@pytest.mark.parametrize(("hooks", "message"), [
    ({"pass": []}, "station.hooks.pass: must hold at least 1 entry"),
    ({"pass": ["/no/such/lamp"]}, "program not found or not executable: /no/such/lamp"),
    ({"pass": ["no-such-lamp-program"]}, "program 'no-such-lamp-program' not found on PATH"),
    ({"pass": ["true", "{operator}"]}, "unknown field {operator}"),
    ({"pass": ["true", "{serial!r}"]}, "unknown field {serial}"),
    ({"pass": ["{plot}"]}, "the program must be a fixed path"),
    ({"buzz": ["true"]}, "unknown key 'buzz'"),
    ({"pass": ["true"], "timeout": "10 min"}, "station.hooks.timeout"),
])
def test_hook_settings_are_checked_when_the_plan_loads(tmp_path, hooks, message):
    plan = write_plan(tmp_path, "TCPIP::127.0.0.1::5025::SOCKET", station={"hooks": hooks})
    with pytest.raises(ConfigError, match=message.replace("{", r"\{").replace("}", r"\}")
                       .replace("(", r"\(").replace(")", r"\)")):
        station_config(load_plan(plan))


def test_a_hook_program_others_may_write_is_refused(tmp_path):
    lamp = hook_script(tmp_path, "lamp")
    lamp.chmod(0o777)
    plan = write_plan(tmp_path, "TCPIP::127.0.0.1::5025::SOCKET",
                      station={"hooks": {"fail": [str(lamp), "red"]}})
    with pytest.raises(ConfigError, match=r"writable by group or others \(mode 0777\)"):
        station_config(load_plan(plan))
    lamp.chmod(0o755)
    assert station_config(load_plan(plan)).hooks.commands["fail"] == (str(lamp), "red")


def test_a_hung_hook_is_ended_and_reported(tmp_path):
    from acquire.station.hooks import Hooks, run_hook

    hooks = Hooks({"pass": (sys.executable, "-c", "import time; time.sleep(30)")}, 0.3)
    outcome = run_hook(hooks, "pass", {"serial": "PA-0001"})
    assert not outcome.ok and "still running after 0.3 s; ended" in outcome.message
    assert run_hook(hooks, "fail", {}) is None  # no hook for that event
