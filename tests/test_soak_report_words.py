"""The soak report reads as a person would write it: the instrument by its identity, the
calibration used, every kept Touchstone file linked, faults as sentences without program
syntax."""

from __future__ import annotations

import re
from pathlib import Path

from test_soak_support import run_calibrated_soak, soak_plan, submit

from acquire.soak.report import write_report
from acquire.soak.sentences import fault_sentence, plain_message, show_bytes
from acquire.soak.spool import Spool
from acquire.soak.worker import SoakWorker, StopSignal
from simulators.server import SimServer


def test_bytes_literals_become_text_or_hex() -> None:
    assert show_bytes(b"#9ABC") == '"#9ABC"'
    assert show_bytes(b"\x00\x1f\xff") == "bytes 00 1f ff (3 bytes)"
    assert plain_message("reply b'\\x00\\x1f' is not a number") == \
        "reply bytes 00 1f (2 bytes) is not a number"
    assert plain_message('got b"OK" then') == 'got "OK" then'
    assert plain_message("a bell b'") == "a bell b'"  # not a literal: left alone


def test_a_fault_row_is_one_sentence() -> None:
    row = {"time_utc": "2026-12-03T03:12:05.120Z", "seq": 14, "kind": "bad-block",
           "message": "block header needs a digit after '#', got b'A'",
           "action": "sweep 14 discarded; retrying (attempt 2 of 3)"}
    assert fault_sentence(row) == (
        "03:12:05 UTC, sweep 14: the instrument sent a malformed data block (block header "
        "needs a digit after '#', got \"A\"); what sweepd did: sweep 14 discarded; retrying "
        "(attempt 2 of 3).")


def test_report_names_instrument_calibration_files_and_faults(tmp_path: Path) -> None:
    spool = Spool(tmp_path / "spool").ensure()
    with SimServer(time_scale=0.0, noise=True) as sim:
        sim.faults.schedule(at=[[4, "garbage"], [7, "drop"]])
        plan = soak_plan(tmp_path / "p.yaml", sim.tcp_resource, tmp_path / "out", count=12,
                         soak={"keep": {"every": 3}})
        job = submit(spool, plan)
        assert SoakWorker(job, StopSignal()).run() == "finished"
    report = write_report(job, tmp_path / "rep")
    text = report.text
    # the identity the simulator answers to *IDN? (manufacturer,model,serial,firmware)
    assert re.search(r"Instrument:\n  sweepd-sim,[^,]+,[^,]+,[^ ]+ at TCPIP::\S+, "
                     r"sweeps 0\.\.11\n", text), text
    assert "Calibration:\n  none: the sweeps are uncorrected" in text
    assert "b'" not in text and 'b"' not in text
    assert "the instrument sent a malformed data block" in text or \
        "the instrument sent a reply that could not be read" in text
    page = report.html.read_text()
    kept = sorted((job.data_dir).glob("*.s1p"))
    assert kept, list(job.data_dir.iterdir())
    for path in kept:
        assert f'href="../out/{job.id}/{path.name}"' in page, path.name
        assert (report.folder / f"../out/{job.id}/{path.name}").resolve() == path.resolve()
    for heading in ("Drift against time", "Stability of the resonance",
                    "Touchstone files kept", "Faults"):
        assert f"<h2>{heading}" in page


def test_report_names_the_calibration_used(tmp_path: Path) -> None:
    spool = Spool(tmp_path / "spool").ensure()
    with SimServer(time_scale=0.0) as sim:
        plan = soak_plan(tmp_path / "p.yaml", sim.tcp_resource, tmp_path / "out", count=4)
        job = run_calibrated_soak(spool, sim, plan)
    (calset,) = (tmp_path / "out" / "cal").glob("*.calset")
    text = write_report(job, tmp_path / "rep").text
    assert re.search(rf"Calibration:\n  {re.escape(calset.stem)}, method one-port, made "
                     r"\d{4}-\d\d-\d\dT[\d:.]+Z, [\d.]+ (ms|s) old at the first sweep and "
                     r"[\d.]+ (ms|s) at the last\n", text), text
