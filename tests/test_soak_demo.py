"""The demo's soak step end to end: a simulator process, the daemon in another, the CLI."""

from __future__ import annotations

from pathlib import Path

import pytest
from test_soak_support import check_invariants, journal_rows

from acquire.demo.context import DemoContext
from acquire.demo.soak import SWEEPS, demo_step
from acquire.soak.spool import Spool
from simulators.process import SimProcess


@pytest.mark.timeout(120)
def test_demo_step_runs_a_short_soak_through_the_daemon(tmp_path: Path,
                                                        capsys: pytest.CaptureFixture) -> None:
    with SimProcess(["--time-scale", "0.02", "--seed", "7"]) as sim:
        ctx = DemoContext(tmp_path, sim)
        demo_step(ctx)
        state = ctx.fixture("state")
    out = capsys.readouterr().out
    assert "$ sweepd submit" in out and "$ sweepd report patch-soak-001" in out
    assert "Soak report patch-soak-001" in out
    assert state["bench"]["drift"]["rate_hz_per_s"] == 0.0  # the world is put back
    job = Spool(tmp_path / "spool").find("patch-soak-001")
    assert job.read_state()["state"] == "finished"
    check_invariants(job, SWEEPS)
    kinds = {f["kind"] for f in journal_rows(job)[2]}
    assert {"connection-lost", "bad-block", "settings-lost"} <= kinds
    labels = dict(ctx.produced)
    assert (labels["soak report (open summary.html)"] / "summary.html").is_file()
