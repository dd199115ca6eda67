"""Plausibility of solved one-port terms, alone and against the last calibration.

|e00|, |e11| < 0.5; |e10e01| within ±3 dB of the last cal; unwrapped ∠e10e01 close to a
straight line; a ≈180° jump of e10e01 against the last cal means open and short were
swapped (a swap passes the raw checks). Common practice, as the raw checks in
``acquire.calibration.checks``; findings name the steps to repeat by kit role (open,
short, load).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from acquire.calibration.checks import (
    FAIL,
    WARN,
    CheckLimits,
    CheckResult,
    Finding,
    _f,
    _finite_max,
    _over,
)
from acquire.calibration.model import OnePortTerms

DEFAULT_LIMITS = CheckLimits()


def check_terms(freq_hz: np.ndarray, terms: OnePortTerms, *,
                previous: OnePortTerms | None = None,
                limits: CheckLimits = DEFAULT_LIMITS) -> CheckResult:
    """Sanity of solved one-port terms, alone and against the last cal of the same setup."""
    freq = np.asarray(freq_hz, np.float64)
    findings: list[Finding] = []
    e00, e11 = np.abs(terms.directivity), np.abs(terms.source_match)
    t = terms.reflection_tracking
    figures: dict[str, Any] = {"max_directivity": float(e00.max()),
                               "max_source_match": float(e11.max())}
    bad = _over(freq, e00, limits.term_max, limits)
    if bad:
        findings.append(Finding(
            "directivity", FAIL, ("load",),
            f"the directivity term is implausibly large (up to {bad[1]:.2f} at "
            f"{_f(bad[2])}): the LOAD step looks wrong; repeat it", *bad, limits.term_max))
    bad = _over(freq, e11, limits.term_max, limits)
    if bad:
        findings.append(Finding(
            "source-match", FAIL, ("open", "short"),
            f"the source match term is implausibly large (up to {bad[1]:.2f} at {_f(bad[2])}): "
            "the OPEN or SHORT step looks wrong; repeat both", *bad, limits.term_max))
    findings += _tracking_phase(freq, t, limits, figures)
    if previous is not None and previous.reflection_tracking.shape == t.shape:
        findings += _tracking_vs_previous(freq, t, previous.reflection_tracking, limits, figures)
    elif previous is not None:
        findings.append(Finding("previous", WARN, (), "the last calibration is on another "
                                "frequency grid; terms were not compared with it"))
    return CheckResult(tuple(findings), figures)


def _tracking_phase(freq: np.ndarray, t: np.ndarray, limits: CheckLimits,
                    figures: dict) -> list[Finding]:
    if t.size < 3:
        return []
    phase = np.unwrap(np.angle(t))
    if np.median(np.abs(np.diff(phase))) > np.pi / 3:  # too sparse to unwrap reliably
        return []
    slope, offset = np.polyfit(freq, phase, 1)
    dev = np.degrees(np.abs(phase - (slope * freq + offset)))
    figures["tracking_round_trip_delay_s"] = float(-slope / (2 * np.pi))
    figures["max_tracking_phase_dev_deg"] = float(dev.max())
    bad = _over(freq, dev, limits.tracking_phase_dev_deg, limits)
    if not bad:
        return []
    return [Finding("tracking-phase", FAIL, ("open", "short", "load"),
                    f"the reflection tracking phase is not a straight line ({bad[1]:.0f}° off at "
                    f"{_f(bad[2])}): intermittent connection or moved cable; repeat all steps",
                    *bad, limits.tracking_phase_dev_deg)]


def _tracking_vs_previous(freq: np.ndarray, t: np.ndarray, t_prev: np.ndarray,
                          limits: CheckLimits, figures: dict) -> list[Finding]:
    findings = []
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = t / t_prev
    change_db = np.abs(20 * np.log10(np.abs(ratio)))
    phase = np.abs(np.angle(ratio, deg=True))
    figures["max_tracking_change_db"] = _finite_max(change_db)
    figures["median_tracking_phase_change_deg"] = float(np.median(phase))
    bad = _over(freq, change_db, limits.tracking_change_db, limits)
    if bad:
        findings.append(Finding(
            "tracking-level", FAIL, ("open", "short", "load"),
            f"reflection tracking changed by {bad[1]:.1f} dB since the last calibration (at "
            f"{_f(bad[2])}, limit {limits.tracking_change_db:g} dB): check the test port cable "
            "and connectors, then repeat all steps", *bad, limits.tracking_change_db))
    flipped = np.abs(np.angle(-ratio, deg=True))
    if np.median(phase) > 135.0 and np.mean(flipped < 45.0) > 1 - limits.max_fraction:
        findings.append(Finding(
            "swapped", FAIL, ("open", "short"),
            "open and short look swapped compared with the last calibration (reflection "
            f"tracking turned by {np.median(phase):.0f}°): repeat the OPEN and SHORT steps",
            float(np.mean(phase > 90.0)), float(np.median(phase)), 0.0, 135.0))
    elif np.mean(phase > 90.0) > limits.max_fraction:
        findings.append(Finding(
            "tracking-phase-change", WARN, (),
            "reflection tracking phase differs from the last calibration: was the test port "
            "cable changed?", float(np.mean(phase > 90.0)), float(phase.max()), 0.0, 90.0))
    return findings
