"""Plausibility of raw standard readings (and the findings both kinds of check report;
the checks of solved terms are in ``acquire.calibration.termchecks``).

Any three distinct raw readings fit some error model exactly, so these checks rest on what
raw data should look like (reference rules, per frequency, with raw M and model Γ):

- balance and opposition: r = [(M_O − M_L)/(M_S − M_L)]/(Γ_O/Γ_S) ≈ (1 − e11Γ_S)/(1 − e11Γ_O)
  with the right standards, so |20·log10|r|| ≤ 6 dB and |∠r| ≤ 45° (limits hold for raw
  source match up to 0.3: 5.4 dB and 33.4°);
- load residual q = |M_L − (d + t·Γ_L)|/|t| with t = (M_O − M_S)/(Γ_O − Γ_S),
  d = M_O − t·Γ_O: about |e11| for a real load, about 1 for an open or short; limit 0.5;
- two steps with the same reading (the same standard connected twice);
- terms after solving: |e00|, |e11| < 0.5; |e10e01| within ±3 dB of the last cal;
  unwrapped ∠e10e01 close to a straight line; a ≈180° jump of e10e01 against the last
  cal means open and short were swapped (a swap passes the raw checks).

A check fails when more than about 1 % of the points break its limit. The limits on raw
readings and the term rules are common practice (no standard defines them); the balance
and opposition bounds follow from the error model above.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import asdict, dataclass
from itertools import permutations
from typing import Any

import numpy as np

from acquire.calibration.model import OnePortTerms
from acquire.units import format_frequency

FAIL, WARN = "fail", "warn"
_ROLES = ("open", "short", "load")


@dataclass(frozen=True)
class CheckLimits:
    """Limits for the plausibility checks (defaults: reference rules / common practice)."""

    balance_db: float = 6.0
    opposition_deg: float = 45.0
    load_residual: float = 0.5
    max_fraction: float = 0.01
    same_reading: float = 0.02  # |M_i − M_j| relative to the larger reading (common practice)
    raw_max: float = 10.0  # raw ratio above this is not a reading (common practice)
    low_level_db: float = 10.0  # "low" reading: this far below the highest step (common practice)
    term_max: float = 0.5
    tracking_change_db: float = 3.0
    tracking_phase_dev_deg: float = 30.0  # common practice
    previous_distance: float = 0.3  # |Γ| distance to the step's model via the last cal


@dataclass(frozen=True)
class Finding:
    """One check result in plain words, with the steps a technician should repeat."""

    check: str
    severity: str
    steps: tuple[str, ...]
    message: str
    fraction: float = 0.0
    worst: float = 0.0
    worst_hz: float = 0.0
    limit: float = 0.0

    def as_dict(self) -> dict[str, Any]:
        return {**asdict(self), "steps": list(self.steps)}


@dataclass(frozen=True)
class CheckResult:
    """Findings plus JSON-able figures (worst values) for the cal set record."""

    findings: tuple[Finding, ...]
    figures: Mapping[str, Any]

    @property
    def passed(self) -> bool:
        return not any(f.severity == FAIL for f in self.findings)

    def repeat_steps(self) -> tuple[str, ...]:
        """Steps named by failing findings, first mention first."""
        out: list[str] = []
        for f in self.findings:
            if f.severity == FAIL:
                out += [s for s in f.steps if s not in out]
        return tuple(out)

    def messages(self) -> list[str]:
        return [f.message for f in self.findings]

    def as_dict(self) -> dict[str, Any]:
        """JSON-able record (for a cal set's figures)."""
        return {"passed": self.passed, "findings": [f.as_dict() for f in self.findings],
                "figures": dict(self.figures)}


def check_raw(freq_hz: np.ndarray, raw: Mapping[str, np.ndarray],
              models: Mapping[str, np.ndarray], *, kinds: Mapping[str, str] | None = None,
              previous: OnePortTerms | None = None,
              limits: CheckLimits = CheckLimits()) -> CheckResult:
    """Check the raw readings of the steps measured so far.

    ``raw`` and ``models`` map step (kit standard) names to (F,) raw readings and actual
    reflections; ``kinds`` maps steps to open/short/load (default: the step name).
    Works after any step: with one step only sanity and the comparison with ``previous``
    (the last cal's terms on the same grid) run; with open, short and load all present
    the balance, opposition and load-residual checks run too.
    """
    freq = np.asarray(freq_hz, np.float64)
    kinds = dict(kinds or {s: s for s in raw})
    findings: list[Finding] = []
    figures: dict[str, Any] = {}
    for step, m in raw.items():
        findings += _sanity(step, np.asarray(m), freq, limits)
    if any(f.severity == FAIL for f in findings):
        return CheckResult(tuple(findings), figures)
    if previous is not None:
        findings += _against_previous(freq, raw, models, kinds, previous, limits, figures)
    same = _same_readings(freq, raw, kinds, limits)
    findings += same
    role = {kinds.get(s): s for s in raw if s in models}
    if all(r in role for r in _ROLES) and not same:
        findings += _triplet(freq, raw, models, role, limits, figures)
    return CheckResult(tuple(findings), figures)


# -- raw checks -----------------------------------------------------------------------


def _sanity(step: str, m: np.ndarray, freq: np.ndarray, limits: CheckLimits) -> list[Finding]:
    name = step.upper()
    if m.shape != freq.shape:
        return [Finding("raw-level", FAIL, (step,),
                        f"the {name} step returned {m.size} points for a {freq.size}-point "
                        "grid: repeat it")]
    finite = np.isfinite(m)
    if not finite.all():
        k = int(np.argmin(finite))
        return [Finding("raw-level", FAIL, (step,),
                        f"the {name} step returned invalid numbers (first at {_f(freq[k])}): "
                        "repeat it", float(1 - finite.mean()), 0.0, float(freq[k]))]
    bad = _over(freq, np.abs(m), limits.raw_max, limits)
    if bad:
        return [Finding("raw-level", FAIL, (step,),
                        f"the {name} step reads {bad[1]:.3g} (raw) at {_f(bad[2])}, not a "
                        "plausible reflection: check the instrument, then repeat it",
                        *bad, limits.raw_max)]
    return []


def _same_readings(freq: np.ndarray, raw: Mapping[str, np.ndarray], kinds: Mapping[str, str],
                   limits: CheckLimits) -> list[Finding]:
    steps = [s for s in raw if kinds.get(s) in _ROLES]
    findings = []
    for i, a in enumerate(steps):
        for b in steps[i + 1:]:
            ma, mb = np.asarray(raw[a]), np.asarray(raw[b])
            scale = np.maximum(np.maximum(np.abs(ma), np.abs(mb)), 1e-30)
            rel = np.abs(ma - mb) / scale
            same = rel < limits.same_reading
            if same.mean() <= limits.max_fraction:
                continue
            k = int(np.argmin(rel))
            hint = _level_hint(raw, kinds, (a, b), limits)
            findings.append(Finding(
                "same-reading", FAIL, (a, b),
                f"the {a.upper()} and {b.upper()} steps read the same at "
                f"{100 * same.mean():.0f} % of the points: the same standard was connected "
                f"twice{hint}; repeat both steps", float(same.mean()), float(rel[k]),
                float(freq[k]), limits.same_reading))
    return findings


def _level_hint(raw: Mapping[str, np.ndarray], kinds: Mapping[str, str],
                pair: tuple[str, str], limits: CheckLimits) -> str:
    """Name the wrong step from raw levels when they are clear (common practice)."""
    others = [s for s in raw if kinds.get(s) in _ROLES and s not in pair]
    if not others:
        return ""
    level = {s: float(np.median(np.abs(raw[s]))) for s in (*pair, others[0])}
    top = max(level.values())
    low = {s: 20 * np.log10(max(v, 1e-30) / top) < -limits.low_level_db for s, v in level.items()}
    if low[pair[0]] != low[pair[1]]:
        return ""
    looks = "LOAD" if low[pair[0]] else "OPEN or SHORT"
    wrong = [s for s in pair if (kinds[s] == "load") != low[pair[0]]]
    if len(wrong) != 1:
        return ""
    return f" (the {wrong[0].upper()} step looks like a{'n' if looks[0] == 'O' else ''} {looks})"


def _metrics(mo: np.ndarray, ms: np.ndarray, ml: np.ndarray, go: np.ndarray, gs: np.ndarray,
             gl: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    with np.errstate(divide="ignore", invalid="ignore"):
        r = ((mo - ml) / (ms - ml)) / (go / gs)
        balance = np.abs(20.0 * np.log10(np.abs(r)))
        opposition = np.abs(np.angle(r, deg=True))
        t = (mo - ms) / (go - gs)
        q = np.abs(ml - (mo - t * go + t * gl)) / np.abs(t)
    return (np.where(np.isnan(balance), np.inf, balance),
            np.where(np.isnan(opposition), 180.0, opposition), np.where(np.isnan(q), np.inf, q))


def _triplet(freq: np.ndarray, raw: Mapping[str, np.ndarray], models: Mapping[str, np.ndarray],
             role: Mapping[str, str], limits: CheckLimits, figures: dict) -> list[Finding]:
    o, s, ld = (role[r] for r in _ROLES)
    g = [np.asarray(models[x]) for x in (o, s, ld)]
    m = [np.asarray(raw[x]) for x in (o, s, ld)]
    balance, opposition, q = _metrics(*m, *g)
    figures.update(max_balance_db=_finite_max(balance), max_opposition_deg=_finite_max(opposition),
                   max_load_residual=_finite_max(q))
    findings = []
    bad = _over(freq, balance, limits.balance_db, limits)
    if bad:
        findings.append(Finding(
            "balance", FAIL, (o, s, ld),
            f"OPEN, SHORT and LOAD readings do not fit together (balance {bad[1]:.1f} dB at "
            f"{_f(bad[2])}, limit {limits.balance_db:g} dB)", *bad, limits.balance_db))
    bad = _over(freq, opposition, limits.opposition_deg, limits)
    if bad:
        findings.append(Finding(
            "opposition", FAIL, (o, s),
            f"OPEN and SHORT are not opposite as their models say ({bad[1]:.0f}° off at "
            f"{_f(bad[2])}, limit {limits.opposition_deg:g}°): wrong or loose standard",
            *bad, limits.opposition_deg))
    bad = _over(freq, q, limits.load_residual, limits)
    if bad:
        findings.append(Finding(
            "load-residual", FAIL, (ld,),
            f"the {ld.upper()} step shows a high reflection ({bad[1]:.2f} at {_f(bad[2])}, "
            f"limit {limits.load_residual:g}): loose connector, bare port or wrong standard",
            *bad, limits.load_residual))
    if findings:
        findings[:0] = _identify(freq, m, g, (o, s, ld), limits)
    return findings


def _identify(freq: np.ndarray, m: list[np.ndarray], g: list[np.ndarray],
              steps: tuple[str, str, str], limits: CheckLimits) -> list[Finding]:
    """Find assignments of the three standards to the steps that pass every raw check."""
    passing = []
    for perm in permutations(range(3)):  # perm[i]: which standard sits on step i
        if perm == (0, 1, 2):
            continue
        held = [0, 0, 0]
        for step_index, std_index in enumerate(perm):
            held[std_index] = step_index
        metrics = _metrics(*(m[held[k]] for k in range(3)), *g)
        lims = (limits.balance_db, limits.opposition_deg, limits.load_residual)
        if all(np.mean(x > lim) <= limits.max_fraction for x, lim in zip(metrics, lims,
                                                                              strict=True)):
            passing.append(perm)
    if not passing:
        return []
    sure = [i for i in range(3) if len({p[i] for p in passing}) == 1 and passing[0][i] != i]
    unsure = [i for i in range(3) if len({p[i] for p in passing}) > 1]
    if not sure and not unsure:
        return []
    parts = [f"the standard on the {steps[i].upper()} step looks like a"
             f"{'n' if _ROLES[passing[0][i]] == 'open' else ''} {_ROLES[passing[0][i]].upper()}"
             for i in sure]
    if unsure:
        parts.append("the " + " and ".join(steps[i].upper() for i in unsure)
                     + f" step{'s' if len(unsure) > 1 else ''} hold the other standards")
    repeat = tuple(steps[i] for i in sorted({*sure, *unsure}))
    return [Finding("identity", FAIL, repeat, "; ".join(parts) + ": repeat "
                    + ", ".join(s.upper() for s in repeat))]


def _against_previous(freq: np.ndarray, raw: Mapping[str, np.ndarray],
                      models: Mapping[str, np.ndarray], kinds: Mapping[str, str],
                      previous: OnePortTerms, limits: CheckLimits, figures: dict
                      ) -> list[Finding]:
    if previous.reflection_tracking.shape != freq.shape:
        return [Finding("previous", WARN, (), "the last calibration is on another frequency grid; "
                        "readings were not compared with it")]
    candidates = {kinds.get(s, s): np.asarray(models[s]) for s in models
                  if kinds.get(s, s) in _ROLES}
    looks: dict[str, str] = {}
    findings = []
    for step, m in raw.items():
        own = kinds.get(step)
        if own not in _ROLES or step not in models:
            continue
        est = previous.correct(m)
        dist = {k: float(np.median(np.abs(est - gm))) for k, gm in candidates.items()}
        figures[f"{step}_vs_last_cal"] = dist[own]
        if dist[own] <= limits.previous_distance:
            continue
        best = min(dist, key=dist.get)
        if best != own and dist[best] <= limits.previous_distance:
            looks[step] = best
        else:
            findings.append(Finding(
                "previous", FAIL, (step,),
                f"the {step.upper()} step differs from what the last calibration predicts "
                f"(by {dist[own]:.2f}): check the connection and the standard, then repeat it",
                1.0, dist[own], 0.0, limits.previous_distance))
    swapped = {kinds.get(s): b for s, b in looks.items()}
    if swapped.get("open") == "short" and swapped.get("short") == "open":
        steps = tuple(s for s in looks if kinds.get(s) in ("open", "short"))
        findings.append(Finding("swapped", FAIL, steps,
                                "open and short look swapped compared with the last calibration: "
                                "repeat the OPEN and SHORT steps"))
        looks = {s: b for s, b in looks.items() if s not in steps}
    for step, best in looks.items():
        findings.append(Finding(
            "identity", FAIL, (step,),
            f"the standard on the {step.upper()} step looks like a"
            f"{'n' if best == 'open' else ''} {best.upper()} (compared with the last "
            f"calibration): repeat it"))
    return findings


# -- helpers ---------------------------------------------------------------------------


def _over(freq: np.ndarray, values: np.ndarray, limit: float, limits: CheckLimits
          ) -> tuple[float, float, float] | None:
    """(fraction over, worst value, its frequency) when more than the allowed share is over."""
    over = ~(values <= limit)
    fraction = float(over.mean()) if values.size else 0.0
    if fraction <= limits.max_fraction:
        return None
    k = int(np.argmax(np.where(np.isfinite(values), values, np.finfo(float).max)))
    return fraction, float(values[k]), float(freq[k])


def _finite_max(values: np.ndarray) -> float | None:
    finite = values[np.isfinite(values)]
    return float(finite.max()) if finite.size else None


def _f(hz: float) -> str:
    return format_frequency(float(hz))
