"""Yield counters: tested, judged, passed, failed, unjudged, retests, yield and
first-pass yield.

Counted over stored measurements of real units (golden checks excluded), in journal
order. A unit is a serial; measurements without a serial count as one unit each.

- tested: units measured; judged: units whose latest result has a verdict;
- passed / failed: judged units whose latest result passes / does not (a check that
  could not judge, verdict ``error``, counts as not passing);
- unjudged: units whose latest result has no verdict (the plan has no checks): neither
  passed nor failed;
- yield: passed / judged (None when nothing was judged);
- retests: measurements with attempt 2 or more;
- first-pass yield: units that passed at their first attempt / judged units whose first
  attempt is among the counted measurements (common practice: FPY counts rework as a
  failure).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

from acquire.journal import JournalStore

UNJUDGED = (None, "none")


@dataclass(frozen=True)
class Yield:
    tested: int = 0
    passed: int = 0
    failed: int = 0
    retests: int = 0
    first_tested: int = 0
    first_passed: int = 0
    unjudged: int = 0

    @property
    def judged(self) -> int:
        return self.passed + self.failed

    @property
    def yield_(self) -> float | None:
        return self.passed / self.judged if self.judged else None

    @property
    def first_pass_yield(self) -> float | None:
        return self.first_passed / self.first_tested if self.first_tested else None

    def line(self) -> str:
        parts = [f"tested {self.tested}", f"passed {self.passed}", f"failed {self.failed}"]
        if self.unjudged:
            parts.append(f"unjudged {self.unjudged}")
        parts += [f"yield {_percent(self.yield_)} ({self.judged} judged)",
                  f"retests {self.retests}",
                  f"first-pass yield {_percent(self.first_pass_yield)}"]
        return " | ".join(parts)

    def to_dict(self) -> dict[str, Any]:
        return {"tested": self.tested, "judged": self.judged, "passed": self.passed,
                "failed": self.failed, "unjudged": self.unjudged, "yield": self.yield_,
                "retests": self.retests, "first_pass_yield": self.first_pass_yield}


def _percent(value: float | None) -> str:
    return "n/a" if value is None else f"{100.0 * value:.1f} %"


def count_yield(rows: Iterable[Mapping[str, Any]]) -> Yield:
    """Counters from rows with ``serial``, ``attempt`` and ``verdict``, oldest first."""
    latest: dict[str, str | None] = {}
    first: dict[str, bool] = {}
    retests = 0
    for n, row in enumerate(rows):
        key = row["serial"] or f"\0{n}"  # no serial: a unit of its own
        verdict = None if row["verdict"] in UNJUDGED else str(row["verdict"])
        latest[key] = verdict
        if int(row["attempt"]) > 1:
            retests += 1
        elif verdict is not None:
            first[key] = verdict == "pass"
    judged = [v for v in latest.values() if v is not None]
    passed = sum(v == "pass" for v in judged)
    return Yield(
        tested=len(latest), passed=passed, failed=len(judged) - passed, retests=retests,
        first_tested=len(first), first_passed=sum(first.values()),
        unjudged=len(latest) - len(judged),
    )


def run_yield(journal: JournalStore, run_id: int) -> Yield:
    """The live counters of one run (a station shift)."""
    rows = journal.run_measurements(run_id, ("stored",))
    return count_yield(r for r in rows if not r["golden"])
