"""|S21| uncertainty after a one-path-two-port calibration.

Sources: GUM (JCGM 100:2008) 5.1.2/5.1.3 for the propagation with numerical sensitivity
coefficients, checked by Monte Carlo per GUM Supplement 1 (JCGM 101:2008) within 10 %
of U; the coverage of a known bias plus a normal error from the normal distribution
(Φ(1.96) − Φ(−1.96) = 0.95; Φ(1.645) = 0.95, tables); and the simulator's ground truth
(an independently written world) after a real one-path-two-port calibration.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np
import pytest

from acquire.calibration import OnePortTerms, load_kit
from acquire.capture.session import Session
from acquire.guided import Options, calibrate
from acquire.plan import load_plan
from acquire.uncertainty.budget import Budget
from acquire.uncertainty.capture import sweep_uncertainty
from acquire.uncertainty.transmission import (
    TwoPortSetup,
    corrected_s21,
    coverage_with_bias,
    inputs,
    transmission_uncertainty,
)
from simulators.server import SimServer

KIT = load_kit("generic-sma-50")
F = np.linspace(10e6, 6e9, 13)
W = 2 * np.pi * F
MODELS = {k: KIT.reflection(k, F) for k in ("open", "short", "load")}
BOX = OnePortTerms(0.05 * np.exp(-1j * W * 0.3e-9), 0.15 * np.exp(1j - 1j * W * 0.5e-9),
                   0.7 * np.exp(-1j * W * 3e-9))
THRU = KIT.thru_s("thru", F)
BUDGETS = {
    "defaults, 2 h": (Budget(cal_age_s=7200), 0.005),
    "noisy, worn connector": (Budget(load_error=0.005, phase_error_deg=2.0,
                                     magnitude_error=0.01, repeatability=0.006, noise=0.003,
                                     cal_age_s=600), 0.01),
}
DEVICES = {
    "6 dB pad": (0.1, 0.5 * np.exp(-1j * W * 1e-9), 0.15),
    "filter passband": (0.3j, 0.9 * np.exp(-1j * W * 2e-9), -0.2),
    "40 dB stop band": (0.05, 0.01, 0.05),
}


def _setup(s11, s21, s22, n: int = 1) -> TwoPortSetup:
    def tile(a):
        return np.tile(np.broadcast_to(np.asarray(a, complex), F.shape), n)
    return TwoPortSetup(
        OnePortTerms(tile(BOX.directivity), tile(BOX.source_match), tile(BOX.reflection_tracking)),
        tile(0.6 * np.exp(-1j * W * 4e-9)), tile(0.12 * np.exp(2j - 1j * W * 1e-9)),
        {k: tile(v) for k, v in MODELS.items()}, (tile(THRU[0]), tile(THRU[1])),
        (tile(s11), tile(s21), tile(s21), tile(s22)))


def _draw(names, shape, rng) -> dict:
    """Each input from its stated distribution (budget module docstring)."""
    x = {}
    for n, (kind, u) in names.items():
        if n == "load.dev":  # uniform over the disc of radius 2u
            x[n] = 2 * u * np.sqrt(rng.uniform(0, 1, shape)) * np.exp(
                2j * np.pi * rng.uniform(0, 1, shape))
        elif kind == "real":  # rectangular ±u√3
            x[n] = rng.uniform(-u * np.sqrt(3), u * np.sqrt(3), shape)
        else:
            x[n] = u * (rng.standard_normal(shape) + 1j * rng.standard_normal(shape))
    return x


@pytest.mark.parametrize(("b", "u", "h"), [(0.0, 1.0, 1.95996), (10.0, 1.0, 11.64485),
                                           (1.0, 1.0, 2.6461)])
def test_coverage_with_a_known_bias(b: float, u: float, h: float) -> None:
    """No bias: 1.96·u. A bias far above u: b + 1.645·u (one tail left). b = u: the
    half-width h solves Φ(h − 1) − Φ(−h − 1) = 0.95; from the normal table
    Φ(1.6461) = 0.95013 and Φ(−3.6461) = 0.00013, so h = 2.6461."""
    got = float(coverage_with_bias(np.array([b]), np.array([u]))[0])
    assert got == pytest.approx(h, abs=1e-4)


@pytest.mark.parametrize("budget", list(BUDGETS))
@pytest.mark.parametrize("device", list(DEVICES))
def test_s21_uncertainty_agrees_with_monte_carlo(budget: str, device: str) -> None:
    b, thru_error = BUDGETS[budget]
    s11, s21, s22 = DEVICES[device]
    unc = transmission_uncertainty(_setup(s11, s21, s22), b, thru_error)
    n = 20_000
    rng = np.random.default_rng(5)
    x = _draw(inputs(b, thru_error), (n * F.size,), rng)
    mc = corrected_s21(_setup(s11, s21, s22, n), x, np.full(n * F.size, b.noise))
    truth = np.broadcast_to(np.asarray(s21, complex), F.shape)
    q = np.quantile(np.abs(np.abs(mc.reshape(n, F.size)) - np.abs(truth)), 0.95, axis=0)
    assert np.all(np.abs(q - unc.expanded) <= 0.10 * unc.expanded), (q, unc.expanded)


def test_one_path_two_port_capture_covers_the_simulator_truth(tmp_path: Path) -> None:
    """A real one-path-two-port calibration on the simulator (noise off, standards as
    modelled): the corrected |S21| and |S11| of a 1 m cable lie within ± U of the
    simulator's truth at every point. The load match the method leaves uncorrected is
    what U must cover here: through the cable it reaches S11 too (Γin = S11 +
    S21·S12·e22/(1 − S22·e22)), about 0.1, ten times the one-port U."""
    plan = tmp_path / "cable.yaml"
    plan.write_text(
        "plan: cable-test\n"
        "instrument: {resource: 'TCPIP::127.0.0.1::5025::SOCKET', dialect: scpi-generic}\n"
        "stimulus: {start: 10 MHz, stop: 3 GHz, points: 201, power: -10 dBm, "
        "if_bandwidth: 1 kHz}\n"
        "measure: two-port\n"
        "calibration: {method: one-path-two-port, kit: generic-sma-50}\n"
        f"output: {{dir: {tmp_path / 'out'}}}\n")
    with SimServer(time_scale=0.0, noise=False) as sim:
        sim.bench.set_device("cable-1m")
        outcome = calibrate(load_plan(plan), Options(resource=sim.tcp_resource, script=""),
                            stdout=io.StringIO())
        assert outcome.calset is not None
        sim.bench.connect("device")
        with Session(load_plan(plan), sim.tcp_resource) as session:
            raw = session.measure()
        truth = sim.bench.truth(raw.freq_hz)
    sweep = outcome.calset.correct(raw)
    unc = sweep_uncertainty(sweep, outcome.calset, KIT)
    s21 = unc.transmission["S21"]
    err21 = np.abs(np.abs(sweep.param("S21")) - np.abs(truth[:, 1, 0]))
    assert np.all(err21 <= s21.expanded)
    assert s21.bias.max() > 0.2 * err21.max()  # the load-match bias is really in U
    err11 = np.abs(np.abs(sweep.param("S11")) - np.abs(truth[:, 0, 0]))
    assert err11.max() > 0.05
    assert np.all(err11 <= unc.reflection["S11"].expanded)
    block = unc.to_dict()["parameters"]["S21"]
    assert block["quantity"] == "s21_abs" and len(block["expanded"]) == 201
    assert any(line.startswith("sweepd uncertainty (95 %) |S21|") for line in
               unc.comment_lines())
