"""One unit (or the golden unit) measured, judged, filed and journalled.

The same path serves ``sweepd station`` and ``sweepd measure``, and reuses the parts of
``sweepd run`` (``acquire.capture``): ``capture`` sweeps, corrects and judges; the file
name comes from the plan's template with the serial sanitised and made unique; the
journal gets the measurement as pending before its files are written and marks it
stored after. Interrupts are held while files and rows are written, so Ctrl-C never
leaves half a record; a crash leaves at worst a pending row that ``reconcile`` settles.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from acquire.capture.calchoice import CalChoice
from acquire.capture.files import Stored, plan_path
from acquire.capture.judge import Capture, capture
from acquire.capture.records import store_journalled
from acquire.capture.session import Session
from acquire.journal import JournalStore, Planned
from acquire.plan import Plan
from acquire.station.config import StationConfig
from acquire.station.errors import GoldenError
from acquire.station.figures import KeyFigures, key_figures, with_figures
from acquire.station.golden import GoldenResult, compare, golden_verdict
from acquire.station.interrupts import deferred_interrupt
from acquire.sweep import Sweep
from drivers.errors import SweepdError


@dataclass
class Line:
    """What a station shift (or one ``sweepd measure`` call) holds open."""

    plan: Plan
    config: StationConfig
    out_dir: Path
    journal: JournalStore
    run_id: int
    station_id: str = ""
    session: Session | None = None
    cal: CalChoice | None = None
    reference: Sweep | None = None  # the golden unit's stored reference


@dataclass
class UnitResult:
    serial: str
    golden: bool
    capture: Capture
    stored: Stored
    planned: Planned
    figures: KeyFigures
    golden_result: GoldenResult | None = None

    @property
    def verdict(self) -> str:
        return self.capture.verdict.verdict

    @property
    def attempt(self) -> int:
        return self.planned.attempt

    @property
    def exit_code(self) -> int:
        return self.capture.verdict.exit_code


# Asked after the sweep, before anything is stored: None keeps the capture, a text
# refuses it (the reason, journalled with the missed measurement).
Confirm = Callable[[Capture], "str | None"]


def measure_unit(line: Line, serial: str, *, golden: bool = False,
                 confirm: Confirm | None = None) -> UnitResult | None:
    """Sweep, judge, store and journal one unit; instrument errors propagate unrecorded
    (the caller journals them as a fault and a missed measurement). ``confirm`` may
    refuse the capture (a unit that was not swapped): it is journalled as missed, nothing
    is stored, and None is returned."""
    if line.session is None or line.cal is None:
        raise SweepdError("station: no instrument session or calibration choice is open")
    plan = line.plan
    seq = line.journal.next_seq(line.run_id)
    meta = {"station": line.station_id} if line.station_id else {}
    if golden:
        meta["golden"] = True
    cap = capture(line.session, line.cal, serial, **meta)
    figures = key_figures(cap.sweep, cap.verdict, plan, line.config.band_hz)
    cap.verdict = with_figures(cap.verdict, figures)
    result = None
    if golden:
        result = _golden_result(line, cap, serial)
        cap.verdict = golden_verdict(cap.verdict, result)
    refused = confirm(cap) if confirm is not None else None
    if refused is not None:
        with deferred_interrupt():
            line.journal.record_missed(line.run_id, [seq], f"not stored: {refused}",
                                       serial=serial)
        return None
    with deferred_interrupt():
        path = plan_path(cap, plan, line.out_dir, serial=serial, index=seq,
                         station=line.station_id)
        planned = line.journal.plan_measurement(line.run_id, seq, path, serial=serial,
                                                golden=golden)
        stored = store_journalled(line.journal, planned, cap, line.plan)
        if result is not None:
            line.journal.record_golden(
                line.run_id, serial, result.passed,
                worst_db=result.magnitude_db.value if result.magnitude_db else None,
                worst_deg=result.phase_deg.value if result.phase_deg else None,
                touchstone=stored.touchstone, message=result.message,
            )
    return UnitResult(serial, golden, cap, stored, planned, figures, result)


def _golden_result(line: Line, cap: Capture, serial: str) -> GoldenResult:
    spec = line.config.golden
    if spec is None or line.reference is None:
        raise GoldenError(f"plan {line.plan.name}: no golden unit in its station section")
    try:
        return compare(cap.sweep, line.reference, spec, line.plan.measure)
    except GoldenError as exc:
        return GoldenResult(False, str(exc), 0, reference=spec.reference.name, serial=serial)


def save_fail_plot(result: UnitResult, plan: Plan, why: str | None) -> Path:
    """A small plot of a failing unit with the plan's masks, written as a new PNG beside
    its Touchstone file (same name, .png); an existing file is never replaced."""
    from acquire.checks import MaskCheck
    from acquire.plotting import figure_bytes
    from acquire.plotting.page import render_compact
    from acquire.storage import write_new

    masks = [c.mask for c in plan.checks if isinstance(c, MaskCheck)]
    touchstone = result.stored.touchstone
    fig = render_compact(result.capture.sweep, masks=masks,
                         title=f"{plan.name}  {result.verdict.upper()}", note=why)
    return write_new(touchstone.with_suffix(".png"), figure_bytes(fig, "png", dpi=90))
