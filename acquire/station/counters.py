"""Yield counters: tested, passed, failed, retests and first-pass yield.

Counted over stored measurements of real units (golden checks excluded), in journal
order. A unit is a serial; measurements without a serial count as one unit each.

- tested: units measured; passed / failed: units whose latest result passes / does not
  (a check that could not judge counts as not passing);
- retests: measurements with attempt 2 or more;
- first-pass yield: units that passed at their first attempt / units whose first attempt
  is among the counted measurements (common practice: FPY counts rework as a failure).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

from acquire.journal import JournalStore


@dataclass(frozen=True)
class Yield:
    tested: int = 0
    passed: int = 0
    failed: int = 0
    retests: int = 0
    first_tested: int = 0
    first_passed: int = 0

    @property
    def first_pass_yield(self) -> float | None:
        return self.first_passed / self.first_tested if self.first_tested else None

    def line(self) -> str:
        fpy = self.first_pass_yield
        shown = "n/a" if fpy is None else f"{100.0 * fpy:.1f} %"
        return (f"tested {self.tested} | passed {self.passed} | failed {self.failed} | "
                f"retests {self.retests} | first-pass yield {shown}")

    def to_dict(self) -> dict[str, Any]:
        return {"tested": self.tested, "passed": self.passed, "failed": self.failed,
                "retests": self.retests, "first_pass_yield": self.first_pass_yield}


def count_yield(rows: Iterable[Mapping[str, Any]]) -> Yield:
    """Counters from rows with ``serial``, ``attempt`` and ``verdict``, oldest first."""
    latest: dict[str, bool] = {}
    first: dict[str, bool] = {}
    retests = 0
    for n, row in enumerate(rows):
        key = row["serial"] or f"\0{n}"  # no serial: a unit of its own
        ok = row["verdict"] == "pass"
        latest[key] = ok
        if int(row["attempt"]) > 1:
            retests += 1
        else:
            first[key] = ok
    return Yield(
        tested=len(latest), passed=sum(latest.values()),
        failed=len(latest) - sum(latest.values()), retests=retests,
        first_tested=len(first), first_passed=sum(first.values()),
    )


def run_yield(journal: JournalStore, run_id: int) -> Yield:
    """The live counters of one run (a station shift)."""
    rows = journal.run_measurements(run_id, ("stored",))
    return count_yield(r for r in rows if not r["golden"])
