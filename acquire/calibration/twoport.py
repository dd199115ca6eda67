"""The 12-term two-port model: solve it from OSL on both ports plus a thru, and correct.

Terms (forward: port 1 drives; reverse: port 2 drives), in the notation of R. B. Marks,
"Formulations of the Basic Vector Network Analyzer Error Model including Switch-Terms",
50th ARFTG Conference Digest, 1997, and of Kruppa and Sodomsky, IEEE Trans. MTT-19(1),
1971, stored under the flat names of ``ErrorModel``:

    S11.directivity e00    S11.source_match e11    S11.reflection_tracking e10e01
    S22.directivity e33'   S22.source_match e22'   S22.reflection_tracking e23'e32'
    S21.transmission_tracking e10e32   S21.isolation e30    S21.load_match e22
    S12.transmission_tracking e23'e01' S12.isolation e03'   S12.load_match e11'

Raw data follow  S11m = e00 + e10e01(S11 − e22ΔS)/D_f,  S21m = e30 + e10e32·S21/D_f,
D_f = 1 − e11S11 − e22S22 + e11e22ΔS  (reverse alike with primed terms).

Two ways to the transmission terms:

- defined thru: the thru's S-parameters come from the kit (offset model); load match and
  tracking follow from the raw thru readings and the one-port terms of each port;
- unknown thru (A. Ferrero and U. Pisani, "Two-port network analyzer calibration using
  an unknown 'thru'", IEEE Microwave and Guided Wave Letters 2(12), 1992): the raw data
  are first freed of the switch terms Γf = a2/b2 (port 1 driving) and Γr = a1/b1
  (Marks 1997), leaving the 8-term model where e10e32·e23e01 = e10e01·e23e32; a
  reciprocal thru gives (e10e32)² = e10e01·e23e32·M21/M12, and the root is the one whose
  thru transmission lies nearer in phase to an estimate (the kit's thru model) at each
  point (within ±90°). The
  8-term terms then convert back to the 12 terms above.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from acquire.calibration.model import OnePortTerms, TransmissionTerms
from acquire.errors import CalError

TWO_PORT_PARAMS = ("S11", "S21", "S12", "S22")


@dataclass(frozen=True, eq=False)
class TwelveTerms:
    """Both ports' one-port terms and both directions' transmission terms."""

    port1: OnePortTerms  # e00, e11, e10e01
    port2: OnePortTerms  # e33', e22', e23'e32'
    forward: TransmissionTerms  # e10e32, e30, e22
    reverse: TransmissionTerms  # e23'e01', e03', e11'

    def embed(self, s: np.ndarray) -> np.ndarray:
        """Raw (F, 2, 2) readings for the true S (F, 2, 2) at the reference planes."""
        s11, s21, s12, s22 = s[:, 0, 0], s[:, 1, 0], s[:, 0, 1], s[:, 1, 1]
        ds = s11 * s22 - s12 * s21
        p1, p2, fw, rv = self.port1, self.port2, self.forward, self.reverse
        d_f = 1.0 - p1.source_match * s11 - fw.load_match * s22 \
            + p1.source_match * fw.load_match * ds
        d_r = 1.0 - rv.load_match * s11 - p2.source_match * s22 \
            + rv.load_match * p2.source_match * ds
        m = np.empty(s.shape, np.complex128)
        m[:, 0, 0] = p1.directivity + p1.reflection_tracking * (s11 - fw.load_match * ds) / d_f
        m[:, 1, 0] = fw.isolation + fw.transmission_tracking * s21 / d_f
        m[:, 1, 1] = p2.directivity + p2.reflection_tracking * (s22 - rv.load_match * ds) / d_r
        m[:, 0, 1] = rv.isolation + rv.transmission_tracking * s12 / d_r
        return m


def correct_twelve(terms: TwelveTerms, raw: np.ndarray) -> dict[str, np.ndarray]:
    """The four corrected S-parameters of raw (F, 2, 2) data (closed-form 12-term inverse).

    With normalised readings N11 = (S11m − e00)/e10e01, N21 = (S21m − e30)/e10e32,
    N12 = (S12m − e03')/e23'e01', N22 = (S22m − e33')/e23'e32' and
    D = (1 + N11·e11)(1 + N22·e22') − N21·N12·e22·e11':
    S11 = (N11(1 + N22·e22') − e22·N21·N12)/D,  S21 = N21(1 + N22(e22' − e22))/D,
    S22 = (N22(1 + N11·e11) − e11'·N21·N12)/D,  S12 = N12(1 + N11(e11 − e11'))/D.
    """
    p1, p2, fw, rv = terms.port1, terms.port2, terms.forward, terms.reverse
    n11 = (raw[:, 0, 0] - p1.directivity) / p1.reflection_tracking
    n21 = (raw[:, 1, 0] - fw.isolation) / fw.transmission_tracking
    n12 = (raw[:, 0, 1] - rv.isolation) / rv.transmission_tracking
    n22 = (raw[:, 1, 1] - p2.directivity) / p2.reflection_tracking
    e11, e22r, e22, e11r = p1.source_match, p2.source_match, fw.load_match, rv.load_match
    with np.errstate(divide="ignore", invalid="ignore"):
        d = (1 + n11 * e11) * (1 + n22 * e22r) - n21 * n12 * e22 * e11r
        return {
            "S11": (n11 * (1 + n22 * e22r) - e22 * n21 * n12) / d,
            "S21": n21 * (1 + n22 * (e22r - e22)) / d,
            "S12": n12 * (1 + n11 * (e11 - e11r)) / d,
            "S22": (n22 * (1 + n11 * e11) - e11r * n21 * n12) / d,
        }


def solve_defined_thru(port1: OnePortTerms, port2: OnePortTerms, thru_raw: np.ndarray,
                       thru_model: np.ndarray, isolation_raw: np.ndarray | None = None
                       ) -> TwelveTerms:
    """Transmission terms from a thru of known S (F, 2, 2) and its raw readings (F, 2, 2).

    Load match from the corrected input reflection Γc = S11 + S21·S12·e22/(1 − S22·e22)
    (and its reverse twin); tracking e10e32 = (S21m − e30)·D_f/S21. ``isolation_raw``
    (loads on both ports) gives e30 = its S21 and e03' = its S12; zero without it.
    """
    t = np.asarray(thru_model, np.complex128)
    m = np.asarray(thru_raw, np.complex128)
    t11, t21, t12, t22 = t[:, 0, 0], t[:, 1, 0], t[:, 0, 1], t[:, 1, 1]
    if np.any(np.abs(t21) < 1e-6) or np.any(np.abs(t12) < 1e-6):
        raise CalError("the thru standard's model transmits nothing: not a thru")
    zero = np.zeros(m.shape[0], np.complex128)
    e30 = zero if isolation_raw is None else np.asarray(isolation_raw)[:, 1, 0]
    e03 = zero if isolation_raw is None else np.asarray(isolation_raw)[:, 0, 1]
    ds = t11 * t22 - t12 * t21
    g1 = port1.correct(m[:, 0, 0]) - t11
    e22 = g1 / (t21 * t12 + t22 * g1)
    g2 = port2.correct(m[:, 1, 1]) - t22
    e11r = g2 / (t21 * t12 + t11 * g2)
    d_f = 1 - port1.source_match * t11 - e22 * t22 + port1.source_match * e22 * ds
    d_r = 1 - e11r * t11 - port2.source_match * t22 + e11r * port2.source_match * ds
    forward = TransmissionTerms((m[:, 1, 0] - e30) * d_f / t21, e30, e22)
    reverse = TransmissionTerms((m[:, 0, 1] - e03) * d_r / t12, e03, e11r)
    return TwelveTerms(port1, port2, forward, reverse)


def remove_switch_terms(raw: np.ndarray, forward: np.ndarray, reverse: np.ndarray
                        ) -> np.ndarray:
    """Raw (F, 2, 2) data freed of the switch terms Γf = a2/b2, Γr = a1/b1 (Marks 1997)."""
    m11, m21, m12, m22 = raw[:, 0, 0], raw[:, 1, 0], raw[:, 0, 1], raw[:, 1, 1]
    gf, gr = np.asarray(forward, np.complex128), np.asarray(reverse, np.complex128)
    d = 1 - m12 * m21 * gf * gr
    out = np.empty(raw.shape, np.complex128)
    out[:, 0, 0] = (m11 - m12 * m21 * gf) / d
    out[:, 1, 0] = (m21 - m22 * m21 * gf) / d
    out[:, 0, 1] = (m12 - m11 * m12 * gr) / d
    out[:, 1, 1] = (m22 - m21 * m12 * gr) / d
    return out


def solve_unknown_thru(port1: OnePortTerms, port2: OnePortTerms, thru_raw: np.ndarray,
                       switch_forward: np.ndarray, switch_reverse: np.ndarray,
                       thru_estimate: np.ndarray, isolation_raw: np.ndarray | None = None
                       ) -> tuple[TwelveTerms, np.ndarray]:
    """12 terms from a reciprocal thru of unknown S plus measured switch terms.

    ``thru_estimate`` (F,) is the expected thru S21 (sign choice only: its phase must be
    right within ±90°). Returns the terms
    and the thru's S21 as recovered by the calibration.
    """
    zero = np.zeros(np.asarray(thru_raw).shape[0], np.complex128)
    e30 = zero if isolation_raw is None else np.asarray(isolation_raw)[:, 1, 0]
    e03 = zero if isolation_raw is None else np.asarray(isolation_raw)[:, 0, 1]
    raw = np.array(thru_raw, np.complex128)
    raw[:, 1, 0] -= e30
    raw[:, 0, 1] -= e03
    m = remove_switch_terms(raw, switch_forward, switch_reverse)
    if np.any(np.abs(m[:, 1, 0]) < 1e-12) or np.any(np.abs(m[:, 0, 1]) < 1e-12):
        raise CalError("the thru reads no transmission: not a thru")
    k = np.sqrt(port1.reflection_tracking * port2.reflection_tracking * m[:, 1, 0] / m[:, 0, 1])
    gf = np.asarray(switch_forward, np.complex128)
    gr = np.asarray(switch_reverse, np.complex128)
    s_a, s_b = (correct_twelve(_from_eight_term(port1, port2, root, gf, gr, e30, e03),
                               np.asarray(thru_raw))["S21"] for root in (k, -k))
    est = np.asarray(thru_estimate, np.complex128)
    pick_a = np.abs(np.angle(s_a / est)) <= np.abs(np.angle(s_b / est))
    root = np.where(pick_a, k, -k)
    terms = _from_eight_term(port1, port2, root, gf, gr, e30, e03)
    return terms, np.where(pick_a, s_a, s_b)


def _from_eight_term(port1: OnePortTerms, port2: OnePortTerms, e10e32: np.ndarray,
                     gf: np.ndarray, gr: np.ndarray, e30: np.ndarray, e03: np.ndarray
                     ) -> TwelveTerms:
    """12 terms from the 8-term boxes and switch terms (Marks 1997): the terminated port's
    match e22 = e22' + e23e32'·Γf/(1 − e33'·Γf), tracking e10e32/(1 − e33'·Γf)."""
    e23e01 = port1.reflection_tracking * port2.reflection_tracking / e10e32
    e22 = port2.source_match + port2.reflection_tracking * gf / (1 - port2.directivity * gf)
    e11r = port1.source_match + port1.reflection_tracking * gr / (1 - port1.directivity * gr)
    forward = TransmissionTerms(e10e32 / (1 - port2.directivity * gf), e30, e22)
    reverse = TransmissionTerms(e23e01 / (1 - port1.directivity * gr), e03, e11r)
    return TwelveTerms(port1, port2, forward, reverse)
