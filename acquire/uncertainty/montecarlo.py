"""Monte Carlo of the full one-port error model, to check the first-order propagation.

Each trial draws every input from the distribution the budget states (see ``budget``):
the actual open, short and load around their models, one reconnection and one noise draw
for each standard's reading, then the device's reconnection, drift and noise. The raw
readings come from a reflectometer with the given error box; the calibration is solved
from them against the *models*, and the device's reading is corrected. The spread of the
corrected readings around the true device is then compared with the propagated U
(JCGM 101:2008, GUM Supplement 1, 8: validating the law of propagation by Monte Carlo).
The calibration step is a parameter, so tests can use an independent solver.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping

import numpy as np

from acquire.calibration.model import OnePortTerms, solve_one_port
from acquire.uncertainty.budget import Budget

# (raw readings (N, 3) of open, short, load; their models (N, 3)) -> corrector of raw
Calibrate = Callable[[np.ndarray, np.ndarray], Callable[[np.ndarray], np.ndarray]]


def solve_and_correct(raw: np.ndarray, models: np.ndarray) -> Callable[[np.ndarray], np.ndarray]:
    """The project's own 3-term solver (``acquire.calibration.model``)."""
    return solve_one_port(raw, models).terms.correct


def _circular(rng: np.random.Generator, rms: np.ndarray | float, shape: tuple[int, ...]
              ) -> np.ndarray:
    sigma = np.asarray(rms, np.float64) / np.sqrt(2)
    return sigma * (rng.standard_normal(shape) + 1j * rng.standard_normal(shape))


def _actual_standards(rng: np.random.Generator, models: Mapping[str, np.ndarray],
                      budget: Budget, shape: tuple[int, ...]) -> np.ndarray:
    phase = np.radians(budget.phase_error_deg)
    out = []
    for k in ("open", "short"):
        turn = np.exp(1j * rng.uniform(-phase, phase, shape))
        scale = 1 + rng.uniform(-budget.magnitude_error, budget.magnitude_error, shape)
        out.append(models[k] * turn * scale)
    radius = budget.load_error * np.sqrt(rng.uniform(0, 1, shape))  # uniform over the disc
    out.append(models["load"] + radius * np.exp(2j * np.pi * rng.uniform(0, 1, shape)))
    return np.stack(out, axis=-1)


def simulate(device: np.ndarray, models: Mapping[str, np.ndarray], box: OnePortTerms,
             budget: Budget, trials: int, rng: np.random.Generator,
             calibrate: Calibrate = solve_and_correct) -> np.ndarray:
    """Corrected readings (trials, F) of the true ``device`` (F,) under the full model."""
    dev = np.asarray(device, np.complex128)
    shape = (trials, dev.size)
    model = {k: np.broadcast_to(np.asarray(models[k], np.complex128), dev.shape)
             for k in ("open", "short", "load")}
    d, m, t = (np.broadcast_to(a, shape) for a in
               (box.directivity, box.source_match, box.reflection_tracking))
    raw_noise = np.broadcast_to(np.asarray(budget.noise, np.float64), dev.shape) * np.abs(
        np.broadcast_to(box.reflection_tracking, dev.shape))

    def read(actual: np.ndarray, dd: np.ndarray, mm: np.ndarray, tt: np.ndarray) -> np.ndarray:
        noisy = actual + _circular(rng, budget.repeatability, actual.shape)
        return dd + tt * noisy / (1 - mm * noisy) + _circular(rng, raw_noise, actual.shape)

    actual = _actual_standards(rng, model, budget, shape)
    raw_std = np.stack([read(actual[..., i], d, m, t) for i in range(3)], axis=-1)
    ideal = np.stack([np.broadcast_to(model[k], shape) for k in ("open", "short", "load")],
                     axis=-1)
    correct = calibrate(raw_std.reshape(-1, 3), ideal.reshape(-1, 3))
    drifted = np.broadcast_to(dev, shape) + _circular(rng, budget.drift, shape)
    raw_dut = read(drifted, d, m, t)
    return correct(raw_dut.reshape(-1)).reshape(shape)


def coverage_radius(corrected: np.ndarray, device: np.ndarray, p: float = 0.95
                    ) -> tuple[np.ndarray, np.ndarray]:
    """Per point: the p-quantile of ||Γ_m| − |Γ|| and of |Γ_m − Γ| over the trials."""
    dev = np.asarray(device, np.complex128)
    mag = np.quantile(np.abs(np.abs(corrected) - np.abs(dev)), p, axis=0)
    vec = np.quantile(np.abs(corrected - dev), p, axis=0)
    return mag, vec
