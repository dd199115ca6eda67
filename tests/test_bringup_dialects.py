"""``sweepd dialect check`` on every shipped dialect against the personality it is written
for: each command is walked without a failure and the instrument's settings are left as
found, also where read-backs carry unit suffixes, settings are fixed, or traces are read
from defined and selected measurements."""

from __future__ import annotations

from dataclasses import astuple
from pathlib import Path

import pytest
import yaml

from acquire.cli import main
from drivers.dialect import DIALECT_DIR
from simulators.server import SimServer

PAIRS = [("generic", "scpi-generic"), ("tabletop", "tabletop-ascii"),
         ("slotted", "slotted-blocks")]


@pytest.mark.parametrize(("personality", "dialect"), PAIRS)
def test_the_walk_passes_and_leaves_the_settings(personality: str, dialect: str,
                                                 capsys: pytest.CaptureFixture) -> None:
    with SimServer(personality=personality, time_scale=0.0) as sim:
        sim.core.change(start_hz=2.3e9, stop_hz=2.6e9, points=101)
        before = astuple(sim.core.settings)
        code = main(["dialect", "check", str(DIALECT_DIR / f"{dialect}.yaml"),
                     "--resource", sim.tcp_resource])
        after = astuple(sim.core.settings)
    out = capsys.readouterr().out
    assert code == 0, [line for line in out.splitlines() if "FAIL" in line]
    assert after == before


def test_a_fixed_setting_is_not_walked(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    doc = yaml.safe_load((DIALECT_DIR / "slotted-blocks.yaml").read_text())
    doc["settings"]["power"] = {"fixed": 0.0}
    path = tmp_path / "fixed.yaml"
    path.write_text(yaml.safe_dump(doc))
    with SimServer(personality="slotted", time_scale=0.0) as sim:
        code = main(["dialect", "check", str(path), "--resource", sim.tcp_resource])
    out = capsys.readouterr().out
    assert code == 0 and "CHANnel:LEVel" not in out
