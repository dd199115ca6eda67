"""Uncertainty of |S21| after a one-path-two-port calibration (one-port + thru; the
method was called enhanced-response).

Measurement model (the exact two-port error model of ``acquire.calibration.model``):
the port-1 one-port is solved from the open, short and load as read (deviations,
reconnection and noise included); the thru gives the transmission tracking and the
load match e22 (``solve_thru``); the device's raw S11 and S21 are what the error box
makes of its true S-parameters, and they are corrected as a capture corrects them
(source match corrected, load match not). Every input of the budget, plus the thru's
magnitude tolerance, is a real variable x_i of that model; its sensitivity ∂S21_c/∂x_i
is taken by central differences at x = 0 (JCGM 100:2008, GUM, 5.1.3 note 2, numerical
sensitivity coefficients), and u²(|S21|) = Σ (Re(conj(Ŝ)·∂S21_c/∂x_i)·u_i)² (5.1.2).
The load match the correction leaves in (e22·S22 and the like, a known bias b along
|S21|) is not corrected by the method; U is then the half-width h of the interval that
holds b + e with 95 % probability, e normal with the standard uncertainty u:
Φ((h − b)/u) − Φ((−h − b)/u) = 0.95 (h = 1.96·u for b = 0, → |b| + 1.645·u for
|b| ≫ u), so the coverage stays 95 % instead of adding |b| to 2u.
Reconnections of the thru and of the device are taken as relative circular errors of
transmission with the budget's RMS repeatability (an assumption, not site data).

In a capture only S11 and S21 are corrected, so the device is taken as reciprocal
(S12 = S21) and its S22 as unknown: S22 = 0 in the model, and the worst case of the
e22·S22 term, with |S22| from the raw reading, is added to the bias (``s22_bound``).
The same load match reaches the corrected S11 through the device (``with_load_match``).
The Monte Carlo in the tests draws the same inputs through this same model, so it checks
the linearisation and the coverage; the simulator's truth checks the model itself.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from acquire.calibration.model import OnePortTerms, solve_one_port, solve_thru
from acquire.uncertainty.budget import Budget

STANDARDS = ("open", "short", "load")
_H = 1e-6


@dataclass(frozen=True)
class TwoPortSetup:
    """What the model needs: error box, standards' models, thru model and the device."""

    box: OnePortTerms  # port 1 directivity, source match, reflection tracking
    tracking: np.ndarray  # e10e32
    load_match: np.ndarray  # e22
    models: Mapping[str, np.ndarray]  # open, short, load reflections
    thru: tuple[np.ndarray, np.ndarray]  # (S11, S21) of the thru's model
    device: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]  # S11, S21, S12, S22
    s22_bound: np.ndarray | float = 0.0  # |S22| when S22 itself is unknown (then S22 = 0)


def inputs(budget: Budget, thru_error: float) -> dict[str, tuple[str, float]]:
    """Name -> (kind, standard uncertainty); kinds: 'real', or 'circ' (per part)."""
    rect = 1 / np.sqrt(3)
    rep, noise = budget.repeatability / np.sqrt(2), 1.0 / np.sqrt(2)  # noise scaled later
    out: dict[str, tuple[str, float]] = {}
    for k in ("open", "short"):
        out[f"{k}.phase"] = ("real", np.radians(budget.phase_error_deg) * rect)
        out[f"{k}.mag"] = ("real", budget.magnitude_error * rect)
    out["load.dev"] = ("circ", budget.load_error / 2)
    for k in STANDARDS:
        out[f"{k}.rep"] = ("circ", rep)
        out[f"{k}.noise"] = ("circ", noise)
    out["thru.mag"] = ("real", thru_error * rect)
    out["thru.rep"] = ("circ", rep)
    out["thru.noise11"] = ("circ", noise)
    out["thru.noise21"] = ("circ", noise)
    out["dut.rep"] = ("circ", rep)
    out["dut.noise11"] = ("circ", noise)
    out["dut.noise21"] = ("circ", noise)
    out["dut.drift"] = ("circ", budget.drift / np.sqrt(2))
    return out


def corrected_s21(setup: TwoPortSetup, x: Mapping[str, np.ndarray], noise: np.ndarray
                  ) -> np.ndarray:
    """S21 as corrected, for input values ``x`` (complex for 'circ' inputs, else real);
    ``noise`` is the RMS trace noise at the reference plane (it scales the noise inputs)."""
    d, m, t = setup.box.directivity, setup.box.source_match, setup.box.reflection_tracking
    raw_noise = noise * np.abs(t)
    e22, e10e32 = setup.load_match, setup.tracking

    def embed(g: np.ndarray) -> np.ndarray:
        return d + t * g / (1 - m * g)

    actual = {
        "open": setup.models["open"] * (1 + x["open.mag"]) * np.exp(1j * x["open.phase"]),
        "short": setup.models["short"] * (1 + x["short.mag"]) * np.exp(1j * x["short.phase"]),
        "load": setup.models["load"] + x["load.dev"],
    }
    raw = np.stack([embed(actual[k] + x[f"{k}.rep"]) + raw_noise * x[f"{k}.noise"]
                    for k in STANDARDS], axis=-1)
    ideal = np.stack([np.broadcast_to(setup.models[k], raw.shape[:-1]) for k in STANDARDS],
                     axis=-1)
    port1 = solve_one_port(raw, ideal).terms
    t11, t21 = setup.thru
    thru = t21 * (1 + x["thru.mag"]) * (1 + x["thru.rep"])
    s11m_thru, s21m_thru = _raw_two_port(embed, m, e22, e10e32, (t11, thru, thru, t11))
    tt = solve_thru(s21m_thru + raw_noise * x["thru.noise21"], t21, source=port1,
                    s11m_thru=s11m_thru + raw_noise * x["thru.noise11"], s11_model=t11,
                    s22_model=t11)
    s11, s21, s12, s22 = setup.device
    s21d = s21 * (1 + x["dut.rep"]) + x["dut.drift"]
    s11m, s21m = _raw_two_port(embed, m, e22, e10e32, (s11, s21d, s12, s22))
    s11c = port1.correct(s11m + raw_noise * x["dut.noise11"])
    return tt.correct(s21m + raw_noise * x["dut.noise21"], port1.source_match, s11c)


def _raw_two_port(embed, e11, e22, e10e32, s) -> tuple[np.ndarray, np.ndarray]:
    s11, s21, s12, s22 = s
    gin = s11 + s21 * s12 * e22 / (1 - s22 * e22)
    den = 1 - e11 * s11 - e22 * s22 + e11 * e22 * (s11 * s22 - s21 * s12)
    return embed(gin), e10e32 * s21 / den


def _zeros(names: Mapping[str, tuple[str, float]], shape: tuple[int, ...]
           ) -> dict[str, np.ndarray]:
    return {n: np.zeros(shape, np.complex128 if kind == "circ" else np.float64)
            for n, (kind, _) in names.items()}


@dataclass(frozen=True, eq=False)
class TransmissionUncertainty:
    """U of |S21| per point: k·u plus the uncorrected load-match bias along |S21|."""

    s21_abs: np.ndarray
    u_abs: np.ndarray
    bias: np.ndarray
    expanded: np.ndarray


def transmission_uncertainty(setup: TwoPortSetup, budget: Budget, thru_error: float = 0.0
                             ) -> TransmissionUncertainty:
    """Per-point U of |S21| (see module doc)."""
    s21 = np.asarray(setup.device[1], np.complex128)
    shape = s21.shape
    noise = np.broadcast_to(np.asarray(budget.noise, np.float64), shape)
    names = inputs(budget, thru_error)
    base = _zeros(names, shape)
    centre = corrected_s21(setup, base, noise)
    unit = centre / np.where(np.abs(centre) > 0, np.abs(centre), 1.0)
    var = np.zeros(shape)
    for name, (kind, u) in names.items():
        for step in ((1.0,) if kind == "real" else (1.0, 1j)):
            plus, minus = dict(base), dict(base)
            plus[name] = np.full(shape, _H * step)
            minus[name] = np.full(shape, -_H * step)
            deriv = (corrected_s21(setup, plus, noise) - corrected_s21(setup, minus, noise)) / (
                2 * _H)
            var += (np.real(np.conj(unit) * deriv) * u) ** 2
    bias = np.abs(np.abs(centre) - np.abs(s21))  # exact along |S21|
    # an unknown S22 (one-path two-port does not correct it): worst case of e22·S22
    e11 = setup.box.source_match
    bias = bias + np.abs(s21) * np.abs(setup.load_match) * np.asarray(setup.s22_bound) / np.abs(
        1 - e11 * np.asarray(setup.device[0]))
    u_abs = np.sqrt(var)
    return TransmissionUncertainty(np.abs(s21), u_abs, bias, coverage_with_bias(bias, u_abs))


def with_load_match(unc: Any, sweep: Any, e22: np.ndarray) -> Any:
    """S11 of a two-port after one-path two-port: port 2's load match reaches the input
    through the device, Γin − S11 = S21·S12·e22/(1 − S22·e22), an error the method
    leaves in. Only S21 is corrected, so S12 = S21 (a reciprocal device) and |S22| from
    the raw reading are assumed, and the phase is not trusted: the whole magnitude
    |S21|²·|e22|/(1 − |S22|·|e22|) is taken as a bias along |S11| (worst case), covered
    with the one-port part by ``coverage_with_bias``; near a match it is added to the
    95 % radius."""
    s21, s22 = np.abs(sweep.param("S21")), np.abs(sweep.param("S22"))
    e = np.abs(e22)
    bias = s21 * s21 * e / np.maximum(1 - s22 * e, 1e-12)
    expanded = np.where(unc.near_match, unc.expanded + bias,
                        coverage_with_bias(bias, unc.u_abs))
    return replace(unc, expanded=expanded)


def coverage_with_bias(bias: np.ndarray, u: np.ndarray, p: float = 0.95) -> np.ndarray:
    """Half-width h with P(|b + e| <= h) = p, e ~ N(0, u²): bisection, 50 steps
    (1.96·u without a bias)."""
    b = np.abs(np.asarray(bias, np.float64))
    s = np.maximum(np.asarray(u, np.float64), 1e-300)
    lo, hi = b, b + 4.0 * s
    for _ in range(50):
        mid = (lo + hi) / 2
        inside = _phi((mid - b) / s) - _phi((-mid - b) / s)
        lo, hi = np.where(inside < p, mid, lo), np.where(inside < p, hi, mid)
    return hi


def _phi(z: np.ndarray) -> np.ndarray:
    erf = np.frompyfunc(math.erf, 1, 1)
    return 0.5 * (1.0 + erf(np.asarray(z) / math.sqrt(2)).astype(np.float64))
