"""What a full two-port cal set gives the uncertainty model of ``fulltwoport``.

``setup_from_calset`` finds the standards the calibration used, checks that the cal set
holds every reading the model solves again (both ports' open, short and load, the thru's
four readings, the switch terms of the unknown thru) and that an unknown-thru set's 12
terms obey the 8-term relation its method gives them; otherwise it returns the one-line
reason the capture reports.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from acquire.calibration.twoport import TWO_PORT_PARAMS, TwelveTerms
from acquire.errors import CalError
from acquire.uncertainty.fulltwoport import (
    KINDS,
    METHODS,
    STANDARDS,
    SWITCH,
    UNKNOWN,
    FullSetup,
    switch_terms,
)


def eight_term_misfit(terms: TwelveTerms) -> float:
    """Largest relative misfit of e10e32(1 − e33'Γf)·e23'e01'(1 − e00Γr) = e10e01·e23'e32'
    (Marks 1997) with the switch terms the 12 terms imply."""
    gf, gr = switch_terms(terms)
    p1, p2 = terms.port1, terms.port2
    lhs = terms.forward.transmission_tracking * (1 - p2.directivity * gf) * \
        terms.reverse.transmission_tracking * (1 - p1.directivity * gr)
    rhs = p1.reflection_tracking * p2.reflection_tracking
    with np.errstate(divide="ignore", invalid="ignore"):
        misfit = np.abs(lhs / rhs - 1)
    return float(np.max(np.where(np.isfinite(misfit), misfit, np.inf), initial=0.0))



def setup_from_calset(sweep: Any, calset: Any, kit: Any) -> FullSetup | str:
    """The model of a corrected two-port ``sweep``, or a one-line reason why there is none."""
    terms = calset.model.twelve_term
    if terms is None or calset.method not in METHODS:
        return f"the {calset.method} cal set holds no full 12-term correction"
    names = _standard_names(calset, kit)
    if isinstance(names, str):
        return names
    wanted = [f"{names[k]}.{p}" for k in STANDARDS for p in ("S11", "S22")]
    wanted += [f"{names['thru']}.{p}" for p in TWO_PORT_PARAMS]
    if calset.method == UNKNOWN:
        wanted += list(SWITCH)
    missing = [key for key in wanted if key not in calset.raw]
    if missing:
        return (f"the cal set holds no raw reading '{missing[0]}' (the model solves its "
                f"{calset.method} calibration again from the readings)")
    f = np.asarray(sweep.freq_hz, np.float64)
    if terms.port1.directivity.shape != f.shape:
        return "the cal set's error terms are on another frequency grid than the sweep"
    if calset.method == UNKNOWN and eight_term_misfit(terms) > 1e-6:
        return ("the cal set's 12 terms do not obey the 8-term relation its "
                f"{calset.method} method gives them")
    load = names["load"]
    isolation = f"{load}.S21" in calset.raw and f"{load}.S12" in calset.raw
    return FullSetup(calset.method, kit, f, names, terms, np.asarray(sweep.s, np.complex128),
                     isolation)


def _standard_names(calset: Any, kit: Any) -> dict[str, str] | str:
    """Kind -> the kit standard the cal set used (its figures' list, else its readings)."""

    listed = calset.figures.get("standards") or [
        n for n in kit.standards if any(k.startswith(f"{n}.") for k in calset.raw)]
    names: dict[str, str] = {}
    for name in listed:
        try:
            kind = kit.standard(str(name)).kind
        except CalError as exc:
            return str(exc)
        if kind not in KINDS or kind in names:
            return (f"the uncertainty model covers one open, short, load and thru; the cal "
                    f"set used {', '.join(map(str, listed))}")
        names[kind] = str(name)
    absent = [k for k in KINDS if k not in names]
    if absent:
        return f"the cal set names no {absent[0]} standard"
    return names
