"""The station with guarded acceptance: an indeterminate unit is retested or held.

The worst-SWR limit is set to the unit's true worst SWR in the band (simulator truth),
so the corrected reading lies on the limit, well inside the guard band U (ILAC-G8:09/2019
guarded acceptance): the unit is neither passed nor failed.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from station_driver import StationProcess
from test_station_support import GOOD, install_cal, rows, write_plan

from simulators.server import SimServer

BAND = ["2.40 GHz", "2.50 GHz"]


@pytest.fixture
def sim():
    with SimServer(serial=True, time_scale=0.0, noise=False) as server:
        yield server


def _plan(tmp_path: Path, sim: SimServer, indeterminate: object) -> Path:
    sim.bench.select_unit(GOOD[0])
    f = np.linspace(2.30e9, 2.60e9, 601)
    g = np.abs(sim.bench.truth(f)[:, 0, 0])
    inside = (f >= 2.40e9) & (f <= 2.50e9)
    worst = float(((1 + g) / (1 - g))[inside].max())
    return write_plan(tmp_path, sim.tcp_resource,
                      checks=[{"worst_swr": {"band": BAND, "at_most": worst}}],
                      decision={"rule": "guarded"},
                      station={"indeterminate": indeterminate, "golden": None})


def _shift(plan: Path, sim: SimServer, *answers: tuple[str, str]) -> list[str]:
    texts = []
    with StationProcess([str(plan), "--station", "bench-7"]).start() as st:
        st.expect("serial> ")
        for send, prompt in answers:
            sim.bench.select_unit(GOOD[0])
            st.send(send)
            texts.append(st.expect(prompt))
        st.send("q")
        assert st.wait() == 0
    return texts


def test_indeterminate_unit_is_retested_then_held(sim, tmp_path: Path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    plan = _plan(tmp_path, sim, {"action": "retest", "retests": 1})
    first, second = _shift(plan, sim, (GOOD[0], "retest> "), ("", "serial> "))
    assert f"{GOOD[0]}: INDETERMINATE" in first and "RETEST: PA-0001 lies within the guard " \
        "band" in first
    assert "RETEST (attempt 2)" in second and "HOLD: put PA-0001 in the hold area" in second
    stored = rows(out, "SELECT verdict, attempt FROM measurements WHERE state = 'stored' "
                  "AND golden = 0 ORDER BY id")
    assert [(r["verdict"], r["attempt"]) for r in stored] == [("indeterminate", 1),
                                                              ("indeterminate", 2)]


def test_hold_rule_holds_at_once(sim, tmp_path: Path) -> None:
    out = tmp_path / "out"
    install_cal(out)
    plan = _plan(tmp_path, sim, "hold")
    (text,) = _shift(plan, sim, (GOOD[0], "serial> "))
    assert "HOLD: put PA-0001 in the hold area" in text and "retest>" not in text
    assert "##" in text  # the big banner


def test_measure_command_reports_indeterminate(sim, tmp_path: Path,
                                               capsys: pytest.CaptureFixture) -> None:
    """`sweepd measure --json` (one unit for MES): exit code 3 and a schema-valid object."""
    from acquire.cli import main
    from tests.schema_support import validate

    install_cal(tmp_path / "out")
    plan = _plan(tmp_path, sim, "hold")
    sim.bench.select_unit(GOOD[0])
    code = main(["measure", str(plan), "--serial", GOOD[0], "--resource", sim.tcp_resource,
                 "--json"])
    data = validate(capsys.readouterr().out, "measure")
    assert code == 3 and data["exit_code"] == 3 and data["verdict"] == "indeterminate"
