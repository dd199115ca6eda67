"""An indeterminate unit at the station: retest it, or put it on hold.

Under guarded acceptance (README "Uncertainty and decision rules") a unit whose value lies
within the guard band of a limit is neither passed nor failed. The plan's
``station.indeterminate`` says what happens: ``retest`` asks the operator to reseat the
unit and measures it again (a new attempt, kept beside the first file) up to ``retests``
times; a unit still indeterminate after that, or under ``hold``, is shown HOLD: it goes
to the hold area for an engineer's decision. Every attempt is stored and journalled with
its verdict; the counters count an indeterminate unit as not passing.
"""

from __future__ import annotations

from collections.abc import Collection
from typing import Any

from acquire.station.unit import UnitResult


def handle_indeterminate(station: Any, serial: str, result: UnitResult,
                         quit_words: Collection[str]) -> bool:
    """Show ``result`` and retest or hold the unit per the station's rule; False when
    the operator quits at the ``retest>`` prompt (or input ends)."""
    rule = station.config.indeterminate
    left = rule.retests if rule.action == "retest" else 0
    while result.verdict == "indeterminate" and left > 0:
        station._show(result, "retest")
        station.term.say(f"RETEST: {serial} lies within the guard band of a limit (neither "
                         "pass nor fail is proven).",
                         f"  reseat {serial} on the fixture, then press Enter to measure it "
                         "again (h = hold it, q = quit)")
        answer = station.term.ask("retest> ")
        word = (answer or "").strip().lower()
        if answer is None or word in quit_words:
            return False
        if word == "h":
            break
        left -= 1
        station.term.say(f"measuring {serial} again ...")
        again = station._measure(serial)
        if again is None:
            return True
        result = again
    if result.verdict != "indeterminate":
        station._show(result)
        return True
    station._show(result, "hold")
    station.term.say(f"HOLD: put {serial} in the hold area for review; it is neither "
                     "passed nor failed")
    return True
