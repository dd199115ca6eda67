"""The demo's production shift runs end to end against a simulator in its own process."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

from acquire.demo.context import DemoContext
from acquire.demo.station import GOLDEN_EVERY, SERIALS, demo_step
from simulators.process import SimProcess


def test_demo_shift(tmp_path: Path, capsys) -> None:
    with SimProcess(["--time-scale", "0", "--seed", "7"]) as sim:
        ctx = DemoContext(tmp_path, sim)
        demo_step(ctx)
    text = capsys.readouterr().out
    out = tmp_path / "results" / "patch-station"
    assert dict(ctx.produced) == {"station shift (files, journal)": out,
                                  "station summary CSV": out / "shift-summary.csv"}
    assert "CANNOT MEASURE: no calibration" in text and "Cal set" in text
    assert "REFUSED: serial 'PA-01/7' holds a path separator" in text
    assert "LINE STOPPED: golden unit GOLDEN is OUT OF TOLERANCE" in text
    assert "RETEST (attempt 2)" in text
    assert f"({GOLDEN_EVERY} units since the last good golden check" in text
    assert f"tested {len(SERIALS)} |" in text and "Cpk" in text
    table = list(csv.DictReader(io.StringIO((out / "shift-summary.csv").read_text())))
    units = [r for r in table if r["golden"] == "0"]
    assert len(units) == len(SERIALS) + 1 and all(Path(r["touchstone"]).is_file() for r in units)
    mes = json.loads(text.strip().splitlines()[-1])
    assert mes["serial"] == "PA-0121" and mes["exit_code"] in (0, 1)
