"""Machine-readable output: with --json every command prints exactly one JSON object, for
errors too, and every document sweepd prints or writes fits its shipped JSON Schema
(configs/schemas/, draft 2020-12, checked with the jsonschema library)."""

from __future__ import annotations

import csv
import io
import json
import re
from pathlib import Path

import jsonschema
import pytest
import yaml
from schema_support import SCHEMAS, one_json_object, schema, validate

from acquire.cli import main
from acquire.library import library_dir
from simulators.server import SimServer

PLANS = library_dir("plans")


def copy_plan(folder: Path, name: str, **changes: object) -> Path:
    data = yaml.safe_load((PLANS / f"{name}.yaml").read_text())
    data.update(changes)
    path = folder / f"{name}.yaml"
    path.write_text(yaml.safe_dump(data))
    return path


def cli(capsys: pytest.CaptureFixture, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_every_shipped_schema_is_a_valid_draft_2020_12_schema() -> None:
    names = sorted(p.name.removesuffix(".schema.json") for p in SCHEMAS.glob("*.schema.json"))
    assert names == ["calset", "capture", "dtf", "error", "measure", "report", "status",
                     "submit", "summary", "verdict"]
    for name in names:
        doc = schema(name)
        assert doc["$schema"] == "https://json-schema.org/draft/2020-12/schema"
        jsonschema.Draft202012Validator.check_schema(doc)


def test_the_error_schema_refuses_what_it_should() -> None:
    good = {"format": "sweepd-error", "version": 1, "command": "run", "exit_code": 2,
            "kind": "PlanError", "error": "plan x.yaml: stimulus.points: ..."}
    validate(good, "error")
    for bad in ({**good, "exit_code": 1}, {**good, "error": "two\nlines"},
                {k: v for k, v in good.items() if k != "kind"}):
        with pytest.raises(jsonschema.ValidationError):
            validate(bad, "error")


@pytest.mark.parametrize(("argv", "command", "words"), [
    (["run", "{tmp}/missing.yaml"], "run", "missing.yaml"),
    (["check", "{tmp}/missing.s1p", "--mask", "patch-2g45"], "check", "missing.s1p"),
    (["check", "{tmp}/missing.s1p"], "check", "nothing to judge against"),
    (["submit", "{tmp}/missing.yaml", "--spool", "{tmp}/spool"], "submit", "missing.yaml"),
    (["status", "no-such-job", "--spool", "{tmp}/spool"], "status", "no-such-job"),
    (["report", "no-such-job", "--spool", "{tmp}/spool"], "report", "no jobs folder"),
    (["summary", "{tmp}/no-journal-here"], "summary", "no-journal-here"),
])
def test_json_errors_are_one_object_on_stdout_and_one_line_on_stderr(
        tmp_path: Path, capsys: pytest.CaptureFixture, argv: list[str], command: str,
        words: str) -> None:
    (tmp_path / "spool").mkdir()
    code, out, err = cli(capsys, *(a.replace("{tmp}", str(tmp_path)) for a in argv), "--json")
    assert code == 2
    doc = validate(one_json_object(out), "error")
    assert doc["command"] == command and doc["exit_code"] == 2 and words in doc["error"]
    assert err.count("\n") == 1 and err == f"sweepd: error: {doc['error']}\n"


def test_without_json_errors_stay_on_stderr(tmp_path: Path,
                                            capsys: pytest.CaptureFixture) -> None:
    code, out, err = cli(capsys, "run", str(tmp_path / "missing.yaml"))
    assert code == 2 and out == "" and err.startswith("sweepd: error: ")


def test_measure_json_error_fits_its_schema(tmp_path: Path,
                                            capsys: pytest.CaptureFixture) -> None:
    code, out, _ = cli(capsys, "measure", str(tmp_path / "missing.yaml"), "--serial", "X1",
                       "--json")
    assert code == 2
    doc = validate(one_json_object(out), "measure")
    assert doc["error"] and doc["warnings"] == []


def test_capture_verdict_summary_and_csv_fit_their_schemas(
        tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    plan = copy_plan(tmp_path, "patch-line-a", checks=[{"mask": "patch-2g45"}],
                     calibration={"method": "none"})
    out = tmp_path / "out"
    with SimServer() as sim:
        code, text, _ = cli(capsys, "run", str(plan), "--resource", sim.tcp_resource,
                            "--output", str(out), "--serial", "PA-0001", "--json")
    assert code in (0, 1)
    capture = validate(one_json_object(text), "capture")
    touchstone = Path(capture["capture"]["touchstone"])
    validate(touchstone.with_suffix(".json").read_text(), "capture")  # the file beside it
    code, text, _ = cli(capsys, "check", str(touchstone), "--mask", "patch-2g45", "--json")
    assert validate(one_json_object(text), "verdict")["exit_code"] == code
    code, text, _ = cli(capsys, "summary", str(out), "--json")
    assert code == 0 and validate(one_json_object(text), "summary")["measurements"] == 1
    code, text, _ = cli(capsys, "summary", str(out), "--csv")
    header = next(csv.reader(io.StringIO(text)))
    assert header[:3] == ["id", "run_id", "plan"]
    assert all(re.fullmatch(r"[a-z][a-z0-9]*(_[a-z0-9]+)*", h) for h in header), header
    assert len(set(header)) == len(header)
    assert "mask_patch_2g45_2_4_ghz_band_worst_swr" in header  # mask, segment, quantity


def test_status_of_a_queued_job_has_the_full_shape(tmp_path: Path,
                                                   capsys: pytest.CaptureFixture) -> None:
    """Before the daemon ever ran it: planned sweeps come from the plan, every counter is
    there (0), drift and alarms have their keys."""
    plan = copy_plan(tmp_path, "patch-soak")
    spool = tmp_path / "spool"
    code, text, _ = cli(capsys, "submit", str(plan), "--spool", str(spool), "--json")
    assert code == 0
    validate(one_json_object(text), "submit")
    code, text, _ = cli(capsys, "status", "--spool", str(spool), "--json")
    view = validate(one_json_object(text), "status")
    (job,) = view["jobs"]
    from acquire.plan import load_plan
    from acquire.soak.spec import parse_soak

    planned = parse_soak(load_plan(plan)).schedule.total()
    assert job["state"] == "queued"
    assert job["sweeps"] == {"planned": planned, "done": 0, "kept": 0, "missed": 0,
                             "failed": 0, "pending": 0, "interrupted": 0}
    assert job["alarms"] == {"count": 0, "active": [], "last": None}


def test_a_calset_header_fits_its_schema() -> None:
    from test_station_support import _calset

    name, data = _calset()
    header = json.loads(_header_of(data))
    validate(header, "calset")
    assert header["id"] == Path(name).stem


def _header_of(data: bytes) -> str:
    import zipfile

    with zipfile.ZipFile(io.BytesIO(data)) as zf:
        return zf.read("header.json").decode()


def test_ctrl_c_with_json_prints_the_error_document_and_exits_130(
        tmp_path: Path, capsys: pytest.CaptureFixture, monkeypatch: pytest.MonkeyPatch) -> None:
    import acquire.capture.run

    def interrupted(*args: object, **kwargs: object) -> None:
        raise KeyboardInterrupt  # what Ctrl-C raises in the middle of a sweep

    monkeypatch.setattr(acquire.capture.run, "run_plan", interrupted)
    plan = copy_plan(tmp_path, "cable-line")
    code, out, err = cli(capsys, "run", str(plan), "--json")
    assert code == 130 and err == "sweepd: interrupted\n"
    doc = validate(one_json_object(out), "error")
    assert (doc["exit_code"], doc["error"], doc["command"]) == (130, "interrupted", "run")
