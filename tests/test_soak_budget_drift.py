"""The uncertainty budget's drift figure from a soak: the structure function
D(τ) = mean |Γ(t+τ) − Γ(t)|² of white noise plus linear drift is 2σ² + r²τ² (expand the
square; the structure-function background of the Allan family is W. J. Riley, NIST
SP 1065, 2008), so a fit recovers the drift per hour and the noise that generated a
synthetic series; too little data gives the reason instead; a real soak on the simulator
shows the figure in the report, matching the simulator's own noise law and drift."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest
from schema_support import validate
from test_soak_support import run_calibrated_soak, soak_plan, submit

from acquire.cli import main
from acquire.soak.budget_drift import (
    PLAN_KEY,
    estimate_drift,
    lag_steps,
    structure_function,
)
from acquire.soak.report import report_document, write_report
from acquire.soak.spool import Job, Spool
from acquire.soak.statistics import Minimums
from acquire.soak.worker import SoakWorker, StopSignal
from simulators.bench import noise_sigma
from simulators.errorbox import measure
from simulators.server import SimServer


def synthetic(seed: int, sweeps: int, points: int, every_s: float, r_per_hour: float,
              sigma: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Γ = Γ0 + v·t + n per point: |v| = r per hour in a random direction per point, n
    circular normal with E|n|² = σ² (each part σ/√2)."""
    rng = np.random.default_rng(seed)
    t = np.arange(sweeps) * every_s
    gamma0 = 0.3 * np.exp(2j * np.pi * rng.random(points))
    v = r_per_hour / 3600.0 * np.exp(2j * np.pi * rng.random(points))
    n = sigma / np.sqrt(2) * (rng.standard_normal((sweeps, points))
                             + 1j * rng.standard_normal((sweeps, points)))
    return gamma0 + t[:, None] * v + n, np.arange(sweeps), t


@pytest.mark.parametrize(("sweeps", "points", "every_s", "r_per_hour", "sigma"), [
    (480, 101, 60.0, 5e-4, 5e-4),  # overnight at 1/min, drift and noise alike
    (200, 51, 30.0, 2e-3, 1e-4),  # drift well above the noise
    (720, 201, 60.0, 1e-4, 1e-3),  # noise far above the drift per hour
])
def test_known_drift_and_noise_are_recovered(sweeps: int, points: int, every_s: float,
                                             r_per_hour: float, sigma: float) -> None:
    # source: the closed form D(τ) = 2σ² + r²τ² of the generating model (module doc)
    values, seq, t = synthetic(7, sweeps, points, every_s, r_per_hour, sigma)
    found = estimate_drift(values, seq, t, Minimums())
    assert not isinstance(found, str), found
    assert found.per_hour == pytest.approx(r_per_hour, rel=0.10)
    assert found.noise_rms == pytest.approx(sigma, rel=0.10)
    assert found.sweeps == sweeps and found.points == points
    assert found.span_s == pytest.approx((sweeps - 1) * every_s)


@pytest.mark.parametrize("r_per_hour", [5e-4, 2e-5])
def test_the_upper_figure_covers_the_true_drift(r_per_hour: float) -> None:
    # a k = 2 bound (JCGM 100:2008, GUM, 6.2: about 95 % for a normal estimate) must hold
    # the true r in most series; 36 of 40 allows for the jackknife's own scatter (nine
    # degrees of freedom from ten blocks)
    held = 0
    for seed in range(40):
        found = estimate_drift(*synthetic(200 + seed, 300, 101, 60.0, r_per_hour, 5e-4),
                               Minimums())
        assert not isinstance(found, str) and found.per_hour_upper is not None
        assert found.per_hour_upper >= found.per_hour
        held += found.per_hour_upper >= r_per_hour
    assert held >= 36


def test_missed_sweeps_leave_gaps_not_bias() -> None:
    values, seq, t = synthetic(3, 400, 61, 60.0, 8e-4, 3e-4)
    rng = np.random.default_rng(4)
    kept = np.sort(rng.choice(400, size=300, replace=False))  # a quarter missed
    found = estimate_drift(values[kept], seq[kept], t[kept], Minimums())
    assert not isinstance(found, str)
    assert found.per_hour == pytest.approx(8e-4, rel=0.10)
    assert found.noise_rms == pytest.approx(3e-4, rel=0.10)


def test_structure_function_matches_every_pair_counted_by_hand() -> None:
    # the definition, by brute force over all pairs, on a series with gaps
    rng = np.random.default_rng(5)
    seq = np.array([0, 1, 2, 4, 5, 8, 9, 10, 13])
    t = seq * 30.0 + rng.uniform(0, 2, seq.size)
    values = rng.standard_normal((seq.size, 4)) + 1j * rng.standard_normal((seq.size, 4))
    for point in structure_function(values, seq, t, lag_steps(13)):
        pairs = [(i, j) for i in range(seq.size) for j in range(seq.size)
                 if seq[j] - seq[i] == point.lag]
        assert point.pairs == len(pairs)
        d = np.mean([np.mean(np.abs(values[j] - values[i]) ** 2) for i, j in pairs])
        tau = np.sqrt(np.mean([(t[j] - t[i]) ** 2 for i, j in pairs]))
        assert point.d == pytest.approx(d, rel=1e-12)
        assert point.tau_s == pytest.approx(tau, rel=1e-12)


@pytest.mark.parametrize("seed", range(5))
def test_no_drift_gives_a_figure_near_zero(seed: int) -> None:
    # Bound derived from the model: with r = 0 each D(τ) is a mean of about P·N terms
    # |Δn|² (exponential, mean and spread 2σ²), so the fitted r² scatters by about
    # 2σ²/(√(P·N)·T²) and r = √r² stays below a few σ/((P·N)^¼·T). In 300 simulated
    # series the largest was 3.5 of that; 5 is the bound asserted.
    sweeps, points, every_s, sigma = 300, 101, 60.0, 5e-4
    values, seq, t = synthetic(100 + seed, sweeps, points, every_s, 0.0, sigma)
    found = estimate_drift(values, seq, t, Minimums())
    assert not isinstance(found, str)
    span_h = (sweeps - 1) * every_s / 3600.0
    floor = sigma / ((points * sweeps) ** 0.25 * span_h)
    assert found.per_hour < 5 * floor
    # the k = 2 upper figure: in the same 300 series at most 4.3 floors
    assert found.per_hour <= found.per_hour_upper < 6 * floor
    assert found.noise_rms == pytest.approx(sigma, rel=0.05)


def test_a_negative_fit_still_has_a_positive_upper_figure() -> None:
    # this series fits r² below zero by more than twice its jackknife error: the upper
    # figure was √(max(r² + 2·error, 0)) = 0, a bound that the true r = 0 only just meets
    # and any drift breaks; it is √(max(r², 0) + 2·error)
    values, seq, t = synthetic(9, 60, 11, 60.0, 0.0, 5e-4)
    found = estimate_drift(values, seq, t, Minimums())
    assert not isinstance(found, str) and found.per_hour == 0.0
    assert found.per_hour_upper is not None and found.per_hour_upper > 0.0


def test_too_little_data_gives_the_reason() -> None:
    values, seq, t = synthetic(1, 12, 11, 60.0, 5e-4, 5e-4)
    shown = estimate_drift(values, seq, t, Minimums())
    assert isinstance(shown, str)
    assert shown.startswith("not enough data (12 sweep(s) over 11 min;")
    values, seq, t = synthetic(1, 40, 11, 1.0, 5e-4, 5e-4)  # enough sweeps, 39 s
    assert "needs at least 20 over 10 min" in estimate_drift(values, seq, t, Minimums())


def _soak(tmp_path: Path, sim: SimServer, count: int, every: str,
          reference: str = "first") -> Job:
    spool = Spool(tmp_path / "spool").ensure()
    plan = soak_plan(tmp_path / "p.yaml", sim.tcp_resource, tmp_path / "out", count=count,
                     every=every, checks=False,
                     soak={"statistics": {"min_sweeps": 20, "min_span": "0.3 s"},
                           "reference": reference})
    job = submit(spool, plan)
    assert SoakWorker(job, StopSignal()).run() == "finished"
    return job


def test_a_soak_on_the_simulator_reports_its_noise(tmp_path: Path,
                                                  capsys: pytest.CaptureFixture) -> None:
    # source: the simulator's noise law (simulators/bench.py): per-component sigma at
    # -10 dBm and 100 kHz, added to the raw values; RMS |n| is √2 times that
    with SimServer(time_scale=0.0, noise=True) as sim:
        job = _soak(tmp_path, sim, count=30, every="0.03 s")
    expected = np.sqrt(2) * noise_sigma(-10.0, 100e3, 1)
    report = write_report(job, tmp_path / "rep")
    block = report.budget_drift
    assert block is not None and "reason" not in block, block
    assert block["noise_rms"] == pytest.approx(expected, rel=0.10)
    done = job.read_status()["sweeps"]["done"]  # a loaded machine may miss a slot
    assert block["sweeps"] == done >= 20 and block["corrected"] is False
    assert block["plan_key"] == PLAN_KEY
    line = next(x for x in report.text.splitlines() if "uncertainty budget" in x)
    assert line.startswith(f"  drift for the uncertainty budget ({PLAN_KEY}): ")
    shown = re.search(r"RMS \|dS11\| \S+ per hour \(at most \S+ at k = 2\); trace noise "
                      rf"(\S+) RMS; {done} sweeps over", line)
    assert shown and float(shown[1]) == pytest.approx(expected, rel=0.10), line
    assert line.endswith("; the sweeps are uncorrected: the raw instrument's figure")
    code = main(["report", job.id, "--spool", str(tmp_path / "spool"), "--json",
                 "-o", str(tmp_path / "rep2")])
    document = validate(capsys.readouterr().out, "report")
    assert code == 0 and document["budget_drift"]["sweeps"] == done
    assert document == validate(report_document(job, write_report(job, tmp_path / "rep2")),
                                "report")


def test_a_soak_on_the_simulator_reports_its_drift(tmp_path: Path) -> None:
    # source: the simulator's own physics: a resonance moving at a known rate changes
    # the raw reading at d(raw)/dt, computed here from its truth and error box
    rate_hz_per_s = 2e5
    with SimServer(time_scale=0.0, noise=True) as sim:
        sim.bench.set_drift(rate_hz_per_s=rate_hz_per_s)
        job = _soak(tmp_path, sim, count=40, every="0.05 s")
        f = np.linspace(2.30e9, 2.60e9, 101)
        terms = sim.bench.error_terms(f)

        def raw(at_s: float) -> np.ndarray:
            s = np.zeros((f.size, 2, 2), dtype=np.complex128)
            s[:, 0, 0] = sim.bench.truth(f, at_s=at_s)[:, 0, 0]
            return measure(terms, s)[:, 0, 0]

        expected = float(np.sqrt(np.mean(np.abs(raw(1.0) - raw(0.0)) ** 2))) * 3600.0
    block = write_report(job, tmp_path / "rep").budget_drift
    assert block is not None and "reason" not in block, block
    assert block["per_hour"] == pytest.approx(expected, rel=0.10)


def test_a_short_soak_says_why_there_is_no_figure(tmp_path: Path) -> None:
    with SimServer(time_scale=0.0, noise=True) as sim:
        job = _soak(tmp_path, sim, count=8, every="0 s")
    report = write_report(job, tmp_path / "rep")
    assert report.budget_drift is not None
    assert report.budget_drift["reason"].startswith("not enough data (8 sweep(s) over")
    assert (f"drift for the uncertainty budget ({PLAN_KEY}): not enough data (8 sweep(s)"
            in report.text)
    validate(report_document(job, report), "report")


def test_a_calibrated_soak_reports_the_noise_at_the_reference_plane(tmp_path: Path) -> None:
    # source: the one-port error model Γ = (m − e00)/(e10e01 + e11(m − e00)) (EURAMET
    # cg-12), whose derivative dΓ/dm = (1 − e11·Γ)²/e10e01 carries the simulator's raw
    # noise (its stated law) to the reference plane, point by point
    spool = Spool(tmp_path / "spool").ensure()
    with SimServer(time_scale=0.0, noise=True) as sim:
        plan = soak_plan(tmp_path / "p.yaml", sim.tcp_resource, tmp_path / "out", count=30,
                         every="0.03 s", checks=False,
                         soak={"statistics": {"min_sweeps": 20, "min_span": "0.3 s"}})
        job = run_calibrated_soak(spool, sim, plan)
        f = np.linspace(2.30e9, 2.60e9, 101)
        terms = sim.bench.error_terms(f)
        gamma = sim.bench.truth(f)[:, 0, 0]
    gain = (1 - terms["e11"] * gamma) ** 2 / terms["e10e01"]
    expected = np.sqrt(2) * noise_sigma(-10.0, 100e3, 1) * np.sqrt(np.mean(np.abs(gain) ** 2))
    block = write_report(job, tmp_path / "rep").budget_drift
    assert block is not None and block["corrected"] is True, block
    assert block["noise_rms"] == pytest.approx(expected, rel=0.10)


def test_a_lost_reference_file_is_named(tmp_path: Path) -> None:
    with SimServer(time_scale=0.0, noise=True) as sim:
        job = _soak(tmp_path, sim, count=25, every="0.02 s")
    first = min(job.data_dir.glob("*.s1p"), key=lambda p: p.stat().st_mtime)
    first.unlink()
    report = write_report(job, tmp_path / "rep")
    reason = report.budget_drift["reason"]
    assert reason.startswith(f"no figure: the reference {first} cannot be read (")
    assert f"drift for the uncertainty budget ({PLAN_KEY}): no figure: the reference" in \
        report.text


def test_a_soak_against_a_reference_file_reads_it(tmp_path: Path) -> None:
    # the records are changes against the plan's reference file; scaled by its |S11| they
    # give the same noise (source: the simulator's noise law, as above)
    import shutil

    with SimServer(time_scale=0.0, noise=True) as sim:
        first = _soak(tmp_path / "a", sim, count=10, every="0 s")
        reference = tmp_path / "b" / "ref.s1p"
        reference.parent.mkdir()
        shutil.copy(sorted(first.data_dir.glob("*.s1p"))[0], reference)
        job = _soak(tmp_path / "b", sim, count=30, every="0.03 s",
                    reference="ref.s1p")
    block = write_report(job, tmp_path / "rep").budget_drift
    assert block is not None and "reason" not in block, block
    assert block["noise_rms"] == pytest.approx(np.sqrt(2) * noise_sigma(-10.0, 100e3, 1),
                                               rel=0.10)


def test_only_the_sweeps_of_one_calibration_count(tmp_path: Path) -> None:
    # a recalibration after sweep 119 moves every corrected value by a step; taken as
    # drift it would inflate r many times. Source: the generating model (module doc)
    from acquire.soak.budget_drift import soak_drift
    from acquire.soak.history import Series
    from acquire.soak.spec import Schedule, SoakSpec

    sweeps, points, every_s, r = 300, 41, 60.0, 4e-4
    values, seq, t = synthetic(9, sweeps, points, every_s, r, 2e-4)
    values[:120] += 0.01 * np.exp(2j * np.pi * np.random.default_rng(10).random(points))
    freq = np.linspace(2.40e9, 2.50e9, points)
    reference = tmp_path / "ref.s1p"
    reference.write_text("# Hz S RI R 50\n" + "".join(
        f"{f:.1f} {g.real:.17g} {g.imag:.17g}\n" for f, g in zip(freq, values[0], strict=True)))
    db = (20 * np.log10(np.abs(values) / np.abs(values[0]))).astype(np.float32)
    deg = np.degrees(np.angle(values * np.conj(values[0]))).astype(np.float32)
    n = sweeps
    ser = Series(seq=seq, state=["stored"] + ["measured"] * (n - 1), t_s=t,
                 verdict=[None] * n, touchstone=[str(reference)] + [None] * (n - 1),
                 note=[None] * n, soak=[None] * n, cal_id=["cal-a"] * 120 + ["cal-b"] * 180,
                 cal_age_s=[None] * n, instrument=[None] * n)
    block = soak_drift(SoakSpec(Schedule(every_s)), ser, (freq, seq, db, deg))
    assert block["per_hour"] == pytest.approx(r, rel=0.10)
    assert block["noise_rms"] == pytest.approx(2e-4, rel=0.10)
    assert block["calibration"] == "cal-b" and block["other_calibration_sweeps"] == 120
    assert block["sweeps"] == 180 and block["corrected"] is True
