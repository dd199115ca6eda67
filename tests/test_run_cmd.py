"""`sweepd run` end to end: every shipped plan against the simulator personality it is
written for, the JSON summary, exit codes, and one-line errors."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import yaml

from acquire.cli import main
from acquire.journal import journal_in
from acquire.library import library_dir
from acquire.touchstone import read_touchstone
from simulators.server import SimServer

PLANS = library_dir("plans")


def copy_plan(tmp_path: Path, name: str, **changes: object) -> Path:
    data = yaml.safe_load((PLANS / f"{name}.yaml").read_text())
    data.update(changes)
    path = tmp_path / f"{name}.yaml"
    path.write_text(yaml.safe_dump(data))
    return path


def test_two_port_cable_plan_over_tcp(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    with SimServer() as sim:
        sim.bench.set_device("cable-1m")
        # the shipped plan without its calibration and mask: raw data, nothing to judge
        plan = copy_plan(tmp_path, "cable-line", calibration={"method": "none"}, checks=[])
        code = main(["run", str(plan), "--resource", sim.tcp_resource,
                     "--output", str(tmp_path), "--serial", "C-0001", "--json"])
        summary = json.loads(capsys.readouterr().out)
        assert code == 0 and summary["exit_code"] == 0
        ts = read_touchstone(summary["capture"]["touchstone"])
        assert ts.data.shape == (1601, 2, 2) and ts.version == "2.0"
        # no calibration section: raw data, through the simulator's lossy test cables
        truth = sim.bench.truth(ts.freq_hz)
        assert np.abs(ts.data[:, 1, 0]).max() < 1.0
        assert np.abs(ts.data - truth).max() > 0.1
        assert ts.meta["serial"] == "C-0001" and ts.meta["corrected"] is False
        assert summary["capture"]["calibration"] is None


def test_whip_plan_on_the_tabletop_over_serial(tmp_path: Path) -> None:
    with SimServer(personality="tabletop", serial=True, tcp_port=None) as sim:
        sim.bench.set_device("whip-915")
        code = main(["run", str(PLANS / "whip-915.yaml"), "--resource", sim.serial_resource,
                     "--output", str(tmp_path), "--serial", "W-0001"])
        assert code == 0
        (path,) = tmp_path.glob("whip-915-W-0001-*.s1p")
        ts = read_touchstone(path)
        assert ts.version == "2.0" and ts.fmt == "DB" and ts.data.shape == (401, 1, 1)
        assert ts.freq_hz[0] == pytest.approx(815e6) and ts.freq_hz[-1] == pytest.approx(1015e6)


def test_patch_plan_needs_its_calibration(tmp_path: Path,
                                          capsys: pytest.CaptureFixture) -> None:
    plan = copy_plan(tmp_path, "patch-line-a", checks=[{"mask": "patch-2g45"}])
    with SimServer() as sim:
        code = main(["run", str(plan), "--resource", sim.tcp_resource,
                     "--output", str(tmp_path / "out")])
        err = capsys.readouterr().err.strip()
        assert code == 2
        assert err.count("\n") == 0 and "no calibration for plan patch-line-a" in err
        assert "run `sweepd calibrate" in err
        with journal_in(tmp_path / "out") as journal:  # the refusal is journalled
            assert journal.run(1)["state"] == "failed"
            assert [f["kind"] for f in journal.faults(1)] == ["CalError"]
        assert not list((tmp_path / "out").glob("*.s1p"))


def test_verdict_sets_the_exit_code_and_files_carry_it(tmp_path: Path,
                                                       capsys: pytest.CaptureFixture) -> None:
    """A unit of the simulated lot that fails the patch mask exits 1; one that passes, 0."""
    plan = copy_plan(tmp_path, "patch-line-a", checks=[{"mask": "patch-2g45"}],
                     calibration={"method": "none"})
    codes = {}
    with SimServer() as sim:
        for serial in (f"PA-{n:04d}" for n in range(1, 40)):
            sim.bench.select_unit(serial)
            codes[serial] = main(["run", str(plan), "--resource", sim.tcp_resource,
                                  "--output", str(tmp_path / "out"), "--serial", serial])
            if {0, 1} <= set(codes.values()):
                break
    capsys.readouterr()
    assert {0, 1} <= set(codes.values())
    with journal_in(tmp_path / "out") as journal:
        rows = journal.measurements()
    assert [r["serial"] for r in rows] == list(codes)
    for row in rows:
        assert row["state"] == "stored" and row["exit_code"] == codes[row["serial"]]
        ts = read_touchstone(row["touchstone"])
        verdict = json.loads(Path(row["touchstone"]).with_suffix(".json").read_text())
        assert verdict["verdict"] == row["verdict"]
        assert any(c.startswith("sweepd verdict: " + row["verdict"].upper())
                   for c in ts.comments)


@pytest.mark.parametrize(
    ("resource", "message"),
    [
        ("TCPIP::127.0.0.1::1::SOCKET", "TCPIP::127.0.0.1::1::SOCKET"),
        ("ASRL/dev/sweepd-no-such-port::INSTR", "sweepd-no-such-port"),
    ],
)
def test_unreachable_instrument_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture,
                                            resource: str, message: str) -> None:
    plan = copy_plan(tmp_path, "cable-line")
    code = main(["run", str(plan), "--resource", resource, "--output", str(tmp_path)])
    err = capsys.readouterr().err
    assert code == 2 and err.startswith("sweepd: error: ") and err.count("\n") == 1
    assert message in err


def test_bad_plan_is_one_line_and_touches_nothing(tmp_path: Path,
                                                  capsys: pytest.CaptureFixture) -> None:
    plan = copy_plan(tmp_path, "cable-line", stimulus={"points": 10})
    code = main(["run", str(plan), "--output", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1
    assert "cable-line.yaml: stimulus.power: is required" in err
    assert not (tmp_path / "out").exists()


def test_corrected_run_recovers_the_device(tmp_path: Path) -> None:
    """Calibrate through the analyzer's standard switch, then run: the file holds the
    device's true reflection (simulator truth), the raw data clearly do not."""
    from acquire.guided import Options, calibrate
    from acquire.plan import load_plan

    plan_path = copy_plan(tmp_path, "patch-line-a", output={"dir": str(tmp_path / "out")})
    with SimServer(serial=True) as sim:
        calibrate(load_plan(plan_path), Options(resource=sim.tcp_resource, prompt="switch"),
                  stdin=_Empty(), stdout=_Sink())
        sim.bench.connect("device")
        assert main(["run", str(plan_path), "--resource", sim.serial_resource]) == 0
        (path,) = (tmp_path / "out").glob("*.s1p")
        ts = read_touchstone(path)
        truth = sim.bench.truth(ts.freq_hz)[:, 0, 0]
        assert np.abs(ts.data[:, 0, 0] - truth).max() < 1e-3
        assert ts.meta["corrected"] is True and ts.meta["cal_method"] == "one-port"


class _Empty:
    def readline(self) -> str:
        return ""


class _Sink:
    def write(self, text: str) -> int:
        return len(text)

    def flush(self) -> None:
        pass


def test_os_errors_are_one_line(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    """A folder that cannot be written (here: a file where the output folder should be)."""
    blocker = tmp_path / "out"
    blocker.write_text("not a folder")
    with SimServer() as sim:
        sim.bench.set_device("cable-1m")
        code = main(["run", str(PLANS / "cable-line.yaml"), "--resource", sim.tcp_resource,
                     "--output", str(blocker / "sub")])
    err = capsys.readouterr().err
    assert code == 2 and err.startswith("sweepd: error: ") and err.count("\n") == 1
    assert "Traceback" not in err
