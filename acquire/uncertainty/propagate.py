"""First-order propagation of the budget to each corrected reflection point.

Measurement model. A one-port calibration maps raw readings onto the standards' models;
when the actual open, short and load deviate from their models by Δ_o, Δ_s, Δ_l, the
corrected reading of a device Γ is off by the residual terms (EURAMET cg-12, "Guidelines
on the Evaluation of Vector Network Analysers", v3.0, 2018)

    ΔΓ ≈ δ_D + δ_T·Γ + δ_M·Γ²,

and to first order those terms solve δ_D + δ_T·Γ_k + δ_M·Γ_k² = −Δ_k for the three
standards k (a corrected standard reads its model). So ΔΓ = −Σ_k L_k(Γ)·Δ_k with L_k the
Lagrange polynomials on the nodes Γ_open, Γ_short, Γ_load: the sensitivity of the reading
to each standard's deviation. Repeatability and noise of each standard's reading are
deviations of that standard too; the device's own reconnection, noise and drift add
directly. Noise is referred to the reference plane through the raw error box:
dΓ/dM_raw = (1 − e11·Γ)²/e10e01.

Propagation (JCGM 100:2008, GUM, 5.1.2, inputs independent): each real input x_i with
standard uncertainty u_i and complex sensitivity a_i adds u_i²·(Re(conj(Γ̂)·a_i))² to the
variance of |Γ| (Γ̂ = Γ/|Γ|, the linearised magnitude) and u_i²·[Re a_i, Im a_i]ᵀ[…] to
the 2×2 covariance of the complex error. Expanded uncertainty U = k·u with k = 2 (GUM 6.2,
about 95 % for a near-normal result).

Near a perfect match (|Γ| < U) the linearisation of |Γ| fails (GUM 5.1.2: significant
non-linearity); there U is the radius that holds the complex error with 95 % probability,
taken from the inputs' own distributions (``coverage``: the load's uniform disc holds
95 % within a smaller radius than a normal of the same variance, JCGM 102:2011, 7).
Only points inside the normal approximation's radius 2.448·√λ_max of the covariance
(bivariate normal coverage, JCGM 102:2011, 5.7; an upper bound for these inputs) need
it. Return
loss and SWR are reported as the intervals that the |Γ| interval maps to, never as a
symmetric ±, since they blow up near a match and near |Γ| = 1 respectively.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from acquire.jsonclean import finite_or_none
from acquire.uncertainty.budget import COVERAGE_FACTOR, Budget
from acquire.uncertainty.coverage import Contribution, radius95

BIVARIATE_95 = float(np.sqrt(-2.0 * np.log(0.05)))  # 2.448: √χ²₂(0.95)
STANDARDS = ("open", "short", "load")


@dataclass(frozen=True, eq=False)
class ReflectionUncertainty:
    """Per-point uncertainty of a corrected reflection (all arrays (F,))."""

    gamma_abs: np.ndarray
    u_abs: np.ndarray  # standard uncertainty of |Γ| (linearised)
    expanded: np.ndarray  # U of |Γ| (k = 2, or the 95 % radius near a match)
    near_match: np.ndarray  # bool: U is the 95 % radius of the complex error
    covariance: np.ndarray  # (F, 2, 2) of (Re ΔΓ, Im ΔΓ)

    @property
    def lower(self) -> np.ndarray:
        return np.maximum(self.gamma_abs - self.expanded, 0.0)

    @property
    def upper(self) -> np.ndarray:
        return self.gamma_abs + self.expanded

    def interval(self, quantity: str) -> tuple[np.ndarray, np.ndarray] | None:
        """(low, high) of ``swr``, ``return_loss`` or ``magnitude_db``; None for others."""
        lo, hi = self.lower, self.upper
        with np.errstate(divide="ignore", invalid="ignore"):
            if quantity == "return_loss":
                return -20 * np.log10(hi), -20 * np.log10(lo)
            if quantity == "magnitude_db":
                return 20 * np.log10(lo), 20 * np.log10(hi)
            if quantity == "swr":
                return _swr(lo), _swr(hi)
        return None

    def summary(self, freq_hz: np.ndarray) -> dict[str, Any]:
        """Largest U and where, plus U at the best match (JSON-able)."""
        k = int(np.argmax(self.expanded))
        best = int(np.argmin(self.gamma_abs))
        rl = self.interval("return_loss")
        assert rl is not None
        return {
            "max_expanded": float(self.expanded[k]), "max_at_hz": float(freq_hz[k]),
            "at_best_match_hz": float(freq_hz[best]),
            "at_best_match_gamma_abs": float(self.gamma_abs[best]),
            "at_best_match_expanded": float(self.expanded[best]),
            "at_best_match_return_loss_db": [finite_or_none(rl[0][best]),
                                             finite_or_none(rl[1][best])],
            "points_near_match": int(self.near_match.sum()),
        }


def _swr(g: np.ndarray) -> np.ndarray:
    return np.where(g < 1.0, (1.0 + g) / np.maximum(1.0 - g, 1e-300), np.inf)


def lagrange(gamma: np.ndarray, nodes: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    """L_k(Γ) for the open, short and load nodes: 1 at its own node, 0 at the others."""
    out = {}
    for k in STANDARDS:
        num = np.ones_like(gamma, dtype=np.complex128)
        den = np.ones_like(gamma, dtype=np.complex128)
        for j in STANDARDS:
            if j != k:
                num = num * (gamma - nodes[j])
                den = den * (nodes[k] - nodes[j])
        out[k] = num / den
    return out


def contributions(gamma: np.ndarray, models: Mapping[str, np.ndarray], budget: Budget,
                  source_match: np.ndarray | float = 0.0) -> list[Contribution]:
    """Every input of the budget with its complex sensitivity and its distribution."""
    g = np.asarray(gamma, np.complex128)
    nodes = {k: np.broadcast_to(np.asarray(models[k], np.complex128), g.shape) for k in STANDARDS}
    lag = lagrange(g, nodes)
    e11 = np.asarray(source_match, np.complex128)
    noise = np.broadcast_to(np.asarray(budget.noise, np.float64), g.shape) / np.sqrt(2)
    rep = budget.repeatability / np.sqrt(2)
    out = []
    for k in ("open", "short"):
        out.append(Contribution(-lag[k] * 1j * nodes[k], "rect",
                                np.radians(budget.phase_error_deg)))
        out.append(Contribution(-lag[k] * nodes[k], "rect", budget.magnitude_error))
    out.append(Contribution(-lag["load"], "disc", budget.load_error))
    for k in STANDARDS:
        out.append(Contribution(-lag[k], "normal", rep))
        out.append(Contribution(-lag[k] * (1 - e11 * nodes[k]) ** 2, "normal", noise))
    out.append(Contribution(np.ones_like(g), "normal", rep))
    out.append(Contribution((1 - e11 * g) ** 2, "normal", noise))
    out.append(Contribution(np.ones_like(g), "normal", budget.drift / np.sqrt(2)))
    return out


def reflection_uncertainty(gamma: np.ndarray, models: Mapping[str, np.ndarray], budget: Budget,
                           source_match: np.ndarray | float = 0.0) -> ReflectionUncertainty:
    """Per-point uncertainty of the corrected reflection ``gamma`` (see module doc)."""
    return reflection_from_contributions(
        gamma, contributions(gamma, models, budget, source_match))


def reflection_from_contributions(gamma: np.ndarray, contribs: list[Contribution]
                                  ) -> ReflectionUncertainty:
    """U of |Γ| from independent inputs: k·u by the law of propagation, or near a match
    (|Γ| below the complex error's 95 % radius) that radius (``coverage.radius95``)."""
    g = np.asarray(gamma, np.complex128)
    mag = np.abs(g)
    unit = np.where(mag > 0, g / np.where(mag > 0, mag, 1.0), 1.0 + 0j)
    var = np.zeros(g.shape)
    cov = np.zeros((*g.shape, 2, 2))
    for c in contribs:
        a = np.broadcast_to(np.asarray(c.sensitivity, np.complex128), g.shape)
        u = np.asarray(c.part_sd())
        if c.kind == "rect":
            var += (np.real(np.conj(unit) * a) * u) ** 2
            vec = np.stack([a.real, a.imag], axis=-1) * u[..., None]
            cov += vec[..., :, None] * vec[..., None, :]
        else:
            both = np.abs(a) ** 2 * u ** 2
            var += both
            cov += both[..., None, None] * np.eye(2)
    u_abs = np.sqrt(var)
    # the normal approximation bounds the radius from above for these (platykurtic or
    # normal) inputs, so only points inside it (with room for the draws' 1 % standard
    # error) need the radius from the distributions
    bound = BIVARIATE_95 * np.sqrt(np.linalg.eigvalsh(cov)[..., -1])
    candidate = mag < 1.05 * bound
    radius = np.zeros(g.shape)
    if candidate.any():
        picked = [Contribution(np.broadcast_to(np.asarray(c.sensitivity, np.complex128),
                                               g.shape)[candidate], c.kind,
                               np.broadcast_to(np.asarray(c.size, np.float64),
                                               g.shape)[candidate])
                  for c in contribs]
        radius[candidate] = radius95(picked, (int(candidate.sum()),))
    near = mag < radius
    expanded = np.where(near, radius, COVERAGE_FACTOR * u_abs)
    return ReflectionUncertainty(mag, u_abs, expanded, near, cov)
