"""Error models: the one-port 3-term model, response variants and transmission tracking.

One-port (R. B. Marks, "Formulations of the Basic Vector Network Analyzer Error Model
including Switch-Terms", 50th ARFTG Conference Digest, 1997)::

    M = e00 + e10e01·Γ/(1 − e11·Γ)        Γ = (M − e00)/(e10e01 + e11·(M − e00))

e00 directivity, e11 source match, e10e01 reflection tracking. With Δe = e00·e11 − e10e01
the model is linear in (e00, e11, Δe): e00 + (Γ·M)·e11 − Γ·Δe = M, one row per known
standard; three standards solve it exactly, more by least squares (the residual then shows
a standard that does not fit). Everything here is batched over frequency: no Python loop
over points.

Transmission (forward, load match neglected for the device)::

    S21m = e30 + e10e32·S21/(1 − e11·S11)

with e30 isolation and e10e32 transmission tracking; e11 = 0 gives the plain transmission
normalisation, a known e11 the one-path two-port correction (both as in the two-port model of
Kruppa and Sodomsky, IEEE Trans. MTT-19(1), 1971, with e22 set to zero for the device).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, ClassVar

import numpy as np

from acquire.errors import CalError

if TYPE_CHECKING:
    from typing import Self

ONE_PORT_TERMS = ("directivity", "source_match", "reflection_tracking")
TRANSMISSION_TERMS = ("transmission_tracking", "isolation", "load_match")
SINGULAR_INDEPENDENCE = 1e-9


class _NamedTerms:
    """Frozen complex (F,) arrays named by ``NAMES``; rebuild with ``from_terms``."""

    NAMES: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        arrays = np.broadcast_arrays(
            *(np.asarray(getattr(self, n), np.complex128) for n in self.NAMES)
        )
        for name, arr in zip(self.NAMES, arrays, strict=True):
            arr = np.array(arr)
            arr.flags.writeable = False
            object.__setattr__(self, name, arr)

    @classmethod
    def from_terms(cls, terms: dict[str, np.ndarray]) -> Self:
        """Rebuild from stored named terms (solve once, apply per sweep)."""
        return cls(*(terms[n] for n in cls.NAMES))

    def as_dict(self) -> dict[str, np.ndarray]:
        return {n: getattr(self, n) for n in self.NAMES}


@dataclass(frozen=True, eq=False)
class OnePortTerms(_NamedTerms):
    """e00 (directivity), e11 (source match), e10e01 (reflection tracking); (F,) arrays."""

    NAMES: ClassVar[tuple[str, ...]] = ONE_PORT_TERMS
    directivity: np.ndarray
    source_match: np.ndarray
    reflection_tracking: np.ndarray

    def correct(self, measured: np.ndarray) -> np.ndarray:
        """Actual reflection from raw readings: Γ = (M − e00)/(e10e01 + e11(M − e00))."""
        d = np.asarray(measured, np.complex128) - self.directivity
        return d / (self.reflection_tracking + self.source_match * d)

    def embed(self, gamma: np.ndarray) -> np.ndarray:
        """Raw readings an ideal reflectometer behind these errors would give for ``gamma``."""
        g = np.asarray(gamma, np.complex128)
        return self.directivity + self.reflection_tracking * g / (1.0 - self.source_match * g)


@dataclass(frozen=True, eq=False)
class OnePortFit:
    """A solved one-port model with its quality figures.

    ``residual`` (F, K) is the model misfit of each standard in raw units (zero, up to
    rounding, for exactly three standards). ``independence`` (F,) is the Hadamard ratio
    |det R|/∏‖column‖ of the (K, 3) system (R from its QR factorisation; |det A| for
    K = 3): 1 for orthogonal columns, 0 where the standards cannot be told apart.
    """

    terms: OnePortTerms
    residual: np.ndarray
    independence: np.ndarray


@dataclass(frozen=True, eq=False)
class TransmissionTerms(_NamedTerms):
    """e10e32 (transmission tracking), e30 (isolation), e22 (load match, if measured)."""

    NAMES: ClassVar[tuple[str, ...]] = TRANSMISSION_TERMS
    transmission_tracking: np.ndarray
    isolation: np.ndarray
    load_match: np.ndarray

    def correct(self, s21m: np.ndarray, source_match: np.ndarray | float = 0.0,
                s11: np.ndarray | float = 0.0) -> np.ndarray:
        """S21 = (S21m − e30)(1 − e11·S11)/e10e32; ``s11`` is the corrected device S11."""
        mismatch = 1.0 - np.asarray(source_match) * np.asarray(s11)
        return (np.asarray(s21m, np.complex128) - self.isolation) * mismatch / (
            self.transmission_tracking
        )

    def embed(self, s21: np.ndarray, source_match: np.ndarray | float = 0.0,
              s11: np.ndarray | float = 0.0) -> np.ndarray:
        """Raw S21 for an actual ``s21`` (and device ``s11``), load match neglected."""
        mismatch = 1.0 - np.asarray(source_match) * np.asarray(s11)
        return self.isolation + self.transmission_tracking * np.asarray(s21) / mismatch


def solve_one_port(measured: np.ndarray, ideals: np.ndarray,
                   names: tuple[str, ...] | None = None,
                   freq_hz: np.ndarray | None = None) -> OnePortFit:
    """Solve the 3-term model from K ≥ 3 standards per frequency.

    ``measured`` and ``ideals`` are (F, K): raw readings and actual reflections of the
    K standards. K = 3 is exact (batched ``numpy.linalg.solve``); K > 3 is least squares
    (batched QR). Raises ``CalError`` naming the frequency and the two standards that
    cannot be told apart where the system is singular.
    """
    m = np.asarray(measured, np.complex128)
    g = np.asarray(ideals, np.complex128)
    if m.shape != g.shape or m.ndim != 2 or m.shape[1] < 3:
        raise ValueError(f"need (F, K>=3) measured and ideals of one shape, got {m.shape}, "
                         f"{g.shape}")
    names = names or tuple(f"standard {k + 1}" for k in range(m.shape[1]))
    _require_finite(m, names, "raw reading")
    _require_finite(g, names, "model reflection")
    a = np.stack([np.ones_like(g), g * m, -g], axis=-1)  # (F, K, 3)
    col_norms = np.prod(np.linalg.norm(a, axis=1), axis=-1)
    if m.shape[1] == 3:
        det = np.abs(np.linalg.det(a))
    else:
        q, r = np.linalg.qr(a)  # reduced: (F, K, 3), (F, 3, 3)
        det = np.abs(np.prod(np.diagonal(r, axis1=1, axis2=2), axis=-1))
    with np.errstate(divide="ignore", invalid="ignore"):
        independence = det / col_norms
    bad = ~(independence > SINGULAR_INDEPENDENCE)
    if bad.any():
        raise _singular_error(int(np.argmax(bad)), m, g, names, freq_hz)
    if m.shape[1] == 3:
        x = np.linalg.solve(a, m[..., None])[..., 0]
    else:
        qhb = np.einsum("fki,fk->fi", q.conj(), m)
        x = np.linalg.solve(r, qhb[..., None])[..., 0]
    residual = np.einsum("fkj,fj->fk", a, x) - m
    e00, e11, delta = x[:, 0], x[:, 1], x[:, 2]
    terms = OnePortTerms(e00, e11, e00 * e11 - delta)
    return OnePortFit(terms, residual, independence)


def solve_response(m_std: np.ndarray, g_std: np.ndarray) -> OnePortTerms:
    """Response calibration from one open or short: e00 = e11 = 0, e10e01 = M/Γ."""
    g = np.asarray(g_std, np.complex128)
    if np.any(np.abs(g) < 0.1):
        raise CalError("a response calibration needs a high-reflection standard (open or short)")
    t = np.asarray(m_std, np.complex128) / g
    return OnePortTerms(np.zeros_like(t), np.zeros_like(t), t)


def solve_two_term(m_std: np.ndarray, g_std: np.ndarray,
                   m_load: np.ndarray, g_load: np.ndarray) -> OnePortTerms:
    """Open or short plus load: e11 = 0; e10e01 and e00 from the two readings."""
    g_s, g_l = np.asarray(g_std, np.complex128), np.asarray(g_load, np.complex128)
    t = (np.asarray(m_std, np.complex128) - m_load) / (g_s - g_l)
    e00 = np.asarray(m_load, np.complex128) - t * g_l
    return OnePortTerms(e00, np.zeros_like(t), t)


def solve_open_short_average(m_open: np.ndarray, g_open: np.ndarray,
                             m_short: np.ndarray, g_short: np.ndarray) -> OnePortTerms:
    """Open/short average: e00 = e11 = 0, e10e01 = (M_O − M_S)/(Γ_O − Γ_S).

    Averaging the two cancels the first-order source-match error of the tracking estimate
    (flush standards: e10e01 = (M_O − M_S)/2).
    """
    t = (np.asarray(m_open, np.complex128) - m_short) / (
        np.asarray(g_open, np.complex128) - g_short
    )
    return OnePortTerms(np.zeros_like(t), np.zeros_like(t), t)


def solve_thru(s21m_thru: np.ndarray, s21_model: np.ndarray, *,
               isolation: np.ndarray | None = None,
               source: OnePortTerms | None = None,
               s11m_thru: np.ndarray | None = None,
               s11_model: np.ndarray | float = 0.0,
               s22_model: np.ndarray | float = 0.0) -> TransmissionTerms:
    """Transmission tracking (and load match) from a thru of known S-parameters.

    Without ``source`` terms: thru response, e10e32 = (S21m − e30)/S21_thru. With the
    port-1 one-port terms and the raw S11 read while the thru was connected, the load
    match e22 follows from the corrected input reflection
    Γc = S11 + S21²·e22/(1 − S22·e22), and e10e32 = (S21m − e30)·D/S21 with
    D = 1 − e11·S11 − e22·S22 + e11·e22·ΔS (exact two-port model, §11 of the reference).
    A reciprocal thru is assumed (S12 = S21).
    """
    s21m = np.asarray(s21m_thru, np.complex128)
    t = np.asarray(s21_model, np.complex128)
    e30 = np.zeros_like(s21m) if isolation is None else np.asarray(isolation, np.complex128)
    if source is None:
        return TransmissionTerms((s21m - e30) / t, e30, np.zeros_like(s21m))
    if s11m_thru is None:
        raise ValueError("a one-path two-port solve needs the raw S11 read with the thru connected")
    s11 = np.asarray(s11_model, np.complex128)
    s22 = np.asarray(s22_model, np.complex128)
    gc = source.correct(s11m_thru)
    e22 = (gc - s11) / (t * t + s22 * (gc - s11))
    e11 = source.source_match
    d = 1.0 - e11 * s11 - e22 * s22 + e11 * e22 * (s11 * s22 - t * t)
    return TransmissionTerms((s21m - e30) * d / t, e30, e22)


def _require_finite(m: np.ndarray, names: tuple[str, ...], what: str) -> None:
    bad = ~np.isfinite(m)
    if bad.any():
        f, k = np.argwhere(bad)[0]
        raise CalError(f"{names[k]}: {what} at point {f} is not a finite number")


def _singular_error(f: int, m: np.ndarray, g: np.ndarray, names: tuple[str, ...],
                    freq_hz: np.ndarray | None) -> CalError:
    from acquire.units import format_frequency

    where = format_frequency(float(freq_hz[f])) if freq_hz is not None else f"point {f}"
    k = m.shape[1]
    pairs = [(i, j) for i in range(k) for j in range(i + 1, k)]
    dg = [abs(g[f, i] - g[f, j]) for i, j in pairs]
    dm = [abs(m[f, i] - m[f, j]) / max(abs(m[f, i]), abs(m[f, j]), 1e-30) for i, j in pairs]
    if min(dg) < 1e-6:
        i, j = pairs[int(np.argmin(dg))]
        why = "their models coincide there: use other standards or split the band"
    else:
        i, j = pairs[int(np.argmin(dm))]
        why = "their raw readings are the same: was the same standard connected twice?"
    return CalError(f"standards '{names[i]}' and '{names[j]}' cannot be told apart at "
                    f"{where} ({why})")
