"""Every corrected capture carries its uncertainty; guarded verdicts end to end.

A one-port calibration through the simulator's standard switch, then `sweepd run`: the
JSON beside the capture holds the per-point U (schema-checked) and the Touchstone file
a summary in its comments. With the worst-SWR limit set to the measured worst SWR,
simple acceptance passes (a value on its limit passes) while guarded acceptance
(ILAC-G8:09/2019) calls the unit indeterminate: exit code 3.
"""

from __future__ import annotations

import io
import json
from pathlib import Path

import numpy as np
import pytest
import yaml

from acquire.cli import main
from acquire.library import library_dir
from acquire.touchstone import read_touchstone
from simulators.server import SimServer
from tests.schema_support import validate

PLANS = library_dir("plans")
BAND = ["2.40 GHz", "2.50 GHz"]


def _plan(tmp_path: Path, name: str, **changes: object) -> Path:
    data = yaml.safe_load((PLANS / "patch-line-a.yaml").read_text())
    data.update(output={"dir": str(tmp_path / "out")}, **changes)
    path = tmp_path / f"{name}.yaml"
    path.write_text(yaml.safe_dump(data))
    return path


def _run(plan: Path, resource: str, capsys: pytest.CaptureFixture) -> tuple[int, dict]:
    code = main(["run", str(plan), "--resource", resource, "--json"])
    return code, json.loads(capsys.readouterr().out)


def test_capture_uncertainty_and_guarded_verdict(tmp_path: Path,
                                                 capsys: pytest.CaptureFixture) -> None:
    from acquire.guided import Options, calibrate
    from acquire.plan import load_plan

    first = _plan(tmp_path, "patch-line-a")
    with SimServer() as sim:
        calibrate(load_plan(first), Options(resource=sim.tcp_resource, prompt="switch"),
                  stdin=io.StringIO(), stdout=io.StringIO())
        sim.bench.connect("device")
        code, summary = _run(first, sim.tcp_resource, capsys)
        assert code == 0
        validate(summary, "capture")
        unc = summary["uncertainty"]
        assert unc["available"] and unc["coverage_factor"] == 2.0
        s11 = unc["parameters"]["S11"]
        assert len(s11["expanded"]) == 601 and min(s11["expanded"]) > 0
        assert unc["budget"]["noise_source"] == "calibration load read twice"
        ts = read_touchstone(summary["capture"]["touchstone"])
        assert any(c.strip().startswith("sweepd uncertainty (k=2) |S11|: max U")
                   for c in ts.comments)
        assert main(["run", str(first), "--resource", sim.tcp_resource]) == 0
        assert "\nuncertainty (k=2) |S11|: max U " in capsys.readouterr().out
        gamma = np.abs(ts.data[:, 0, 0])
        inside = (ts.freq_hz >= 2.40e9) & (ts.freq_hz <= 2.50e9)
        worst = float(((1 + gamma) / (1 - gamma))[inside].max())

        limit = [{"worst_swr": {"band": BAND, "at_most": round(worst, 9) + 1e-9}}]
        simple = _plan(tmp_path, "simple", checks=limit)
        code, summary = _run(simple, sim.tcp_resource, capsys)
        assert (code, summary["verdict"]) == (0, "pass")
        assert summary["decision"]["rule"] == "simple"

        guarded = _plan(tmp_path, "guarded", checks=limit, decision={"rule": "guarded"})
        code, summary = _run(guarded, sim.tcp_resource, capsys)
        validate(summary, "capture")
        assert (code, summary["verdict"], summary["exit_code"]) == (3, "indeterminate", 3)
        assert summary["checks"][0]["guarded"]["worst_guarded_margin"] < 0
        ts = read_touchstone(summary["capture"]["touchstone"])
        assert any("sweepd verdict: INDETERMINATE (exit 3)" in c for c in ts.comments)

    # offline: `sweepd check` with the plan takes U from the capture JSON beside the file
    capture = Path(summary["capture"]["touchstone"])
    assert main(["check", str(capture), "--plan", str(guarded), "--json"]) == 3
    assert json.loads(capsys.readouterr().out)["verdict"] == "indeterminate"
    assert main(["check", str(capture), "--plan", str(simple)]) == 0
    capsys.readouterr()
    lonely = tmp_path / "lonely.s1p"
    lonely.write_bytes(capture.read_bytes())
    assert main(["check", str(lonely), "--plan", str(guarded), "--json"]) == 2
    message = json.loads(capsys.readouterr().out)["checks"][0]["message"]
    assert "no capture JSON lonely.json beside the file" in message


def test_uncorrected_capture_says_why_it_has_no_uncertainty(
        tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    plan = _plan(tmp_path, "raw", calibration={"method": "none"},
                 checks=[{"worst_swr": {"band": BAND, "at_most": 3.0}}],
                 decision={"rule": "guarded"})
    with SimServer() as sim:
        sim.bench.connect("device")
        code, summary = _run(plan, sim.tcp_resource, capsys)
    validate(summary, "capture")
    assert summary["uncertainty"]["available"] is False
    assert summary["uncertainty"]["unavailable"] == "the sweep is uncorrected"
    assert code == 2 and summary["verdict"] == "error"
    assert "guarded acceptance needs the uncertainty of S11" in summary["checks"][0]["message"]


def test_a_guided_calibration_reads_the_load_twice_for_the_noise(tmp_path: Path) -> None:
    """On a coarse, wide sweep (201 points, 10 MHz–6 GHz, where the test cable's ripple is
    undersampled) the calibration's second reading of the load gives the simulator's
    trace noise at the reference plane within 15 %. Source: the simulator's noise law
    (simulators/bench.py: per-part σ of a raw value, so RMS |n| = √2·σ), referred through
    |e10e01| (one-port error model, EURAMET cg-12)."""
    from acquire.calibration import CalSet
    from acquire.guided import Options, calibrate
    from acquire.plan import load_plan
    from acquire.uncertainty.budget import noise_from_load, noise_from_repeat
    from simulators.bench import noise_sigma

    wide = {"start": "10 MHz", "stop": "6 GHz", "points": 201, "power": "-10 dBm",
            "if_bandwidth": "100 kHz"}
    plan = _plan(tmp_path, "wide", stimulus=wide, checks=[])
    with SimServer(noise=True) as sim:
        outcome = calibrate(load_plan(plan), Options(resource=sim.tcp_resource,
                                                     prompt="switch"),
                            stdin=io.StringIO(), stdout=io.StringIO())
    assert outcome.saved is not None
    calset = CalSet.load(outcome.saved)  # as written to disk
    assert sorted(k for k in calset.raw if k.startswith("load.")) == ["load.S11",
                                                                      "load.S11-again"]
    tracking = calset.model.reflection["S11"].reflection_tracking
    expected = np.sqrt(2) * noise_sigma(-10.0, 100e3, 1) / np.median(np.abs(tracking))
    got = noise_from_repeat(calset.raw["load.S11"], calset.raw["load.S11-again"], tracking)
    assert got == pytest.approx(expected, rel=0.15)
    # the one-reading estimate it replaces is far off on such a sweep
    assert noise_from_load(calset.raw["load.S11"], tracking) > 3 * expected
