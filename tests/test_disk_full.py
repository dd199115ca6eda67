"""A full disk under ``sweepd run`` and ``sweepd measure``: an error (exit 2, one line, the
error document with --json), never a verdict, and nothing half-done: no summary saying
PASS beside a Touchstone file that was never written, no row stored without its files.
Once space is freed, the next start settles what was left and everything agrees.

On a real 2 MiB tmpfs, filled to leave a range of free sizes so that the disk runs out at
every step (journal, pending row, summary, Touchstone file, stored row, end of run)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
import yaml
from disk_support import leave_free, small_disk
from schema_support import validate
from test_station_support import GOOD, PLAN, rows

from acquire.cli import main
from simulators.server import SimServer

# bytes left free; the capture itself is ~35 kB (Touchstone) + ~6 kB (summary)
FREE = (0, 20_000, 60_000, 100_000, 115_000, 125_000, 135_000, 145_000, 155_000, 165_000,
        175_000, 185_000, 400_000)


@pytest.fixture
def disk(tmp_path):
    with small_disk(tmp_path / "disk") as folder:
        yield folder


def plan_file(tmp_path: Path, resource: str) -> Path:
    data = yaml.safe_load(PLAN.read_text())
    data["instrument"]["resource"] = resource
    data["calibration"] = {"method": "none"}
    data.pop("station")
    path = tmp_path / "plan.yaml"
    path.write_text(yaml.safe_dump(data))
    return path


def agree(out: Path) -> None:
    """Files and journal agree: nothing pending or running, every stored row's files
    exist, every capture file belongs to a stored row, no summary without its capture."""
    assert not rows(out, "SELECT id FROM measurements WHERE state = 'pending'")
    assert not rows(out, "SELECT id FROM runs WHERE state = 'running'")
    stored = rows(out, "SELECT touchstone, summary FROM measurements WHERE state = 'stored'")
    for row in stored:
        assert Path(row["touchstone"]).is_file() and Path(row["summary"]).is_file()
    assert {Path(r["touchstone"]) for r in stored} == set(out.glob("*.s1p"))
    assert {Path(r["summary"]) for r in stored} == set(out.glob("*.json"))


@pytest.mark.parametrize("command", ["run", "measure"])
def test_a_full_disk_is_an_error_and_leaves_nothing_half_done(disk, tmp_path, capsys,
                                                              command) -> None:
    seen = set()
    with SimServer(time_scale=0.0, noise=False) as sim:
        plan = plan_file(tmp_path, sim.tcp_resource)
        sim.bench.select_unit(GOOD[0])
        for n, free in enumerate(FREE):
            out = disk / f"out-{n}"
            filler = leave_free(disk, free)
            code = main([command, str(plan), "--output", str(out), "--serial", GOOD[0],
                         "--json"])
            captured = capsys.readouterr()
            document = json.loads(captured.out)
            if code == 0:
                seen.add("ok")
                assert document["verdict"] == "pass"
            else:
                assert code == 2, (free, captured.err)  # an error, never a verdict
                line = captured.err.strip()
                assert line.startswith("sweepd: error: ") and "\n" not in line, line
                assert "Traceback" not in captured.err
                assert "disk is full" in line or "No space left" in line, line
                assert document["exit_code"] == 2
                validate(document, "error" if command == "run" else "measure")
                seen.add(line.split(":")[2].split()[0])  # journal, touchstone, ...
                # no summary saying PASS for a capture that never landed
                for summary in out.glob("*.json"):
                    assert summary.with_suffix(".s1p").is_file(), summary
            filler.unlink()  # space is back: the next start settles what was left
            assert main([command, str(plan), "--output", str(out), "--serial", GOOD[1],
                         "--json"]) == 0
            capsys.readouterr()
            agree(out)
            for path in out.iterdir():
                if path.is_file():
                    path.unlink()
    assert "ok" in seen and len(seen) >= 3, seen  # the disk ran out at several steps
