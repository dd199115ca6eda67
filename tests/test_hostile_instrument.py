"""A hostile instrument (a real socket on loopback) against ``sweepd run``.

Each misbehaviour of ``fake_instrument.FakeInstrument`` must end in one line on stderr and
exit 2 within the deadline the plan implies (reply timeout, plus the bounded sweep time
where a sweep is pending), with no thread or file descriptor left behind, and no file
under a final name for a sweep that never arrived. The honest mode is the control case.
"""

from __future__ import annotations

import os
import re
import threading
import time
from pathlib import Path

import pytest
import yaml
from fake_instrument import FakeInstrument

from acquire.cli import main
from drivers.dialect import DIALECT_DIR

TIMEOUT_S = 0.5


def write_plan(folder: Path, resource: str, **instrument: object) -> Path:
    plan = {
        "plan": "hostile",
        "instrument": {"resource": resource, "dialect": "scpi-generic",
                       "timeout": f"{TIMEOUT_S} s", "connect_timeout": "1 s", **instrument},
        "stimulus": {"start": "2.4 GHz", "stop": "2.5 GHz", "points": 11, "power": "-10 dBm",
                     "if_bandwidth": "1 kHz"},
        "measure": ["S11"],
        "output": {"dir": str(folder / "out")},
    }
    path = folder / "hostile.yaml"
    path.write_text(yaml.safe_dump(plan, sort_keys=False))
    return path


def open_fds() -> int:
    return len(os.listdir("/proc/self/fd"))


def run_against(fake: FakeInstrument, tmp_path: Path, capsys: pytest.CaptureFixture,
                **instrument: object) -> tuple[int, str, float]:
    plan = write_plan(tmp_path, fake.resource, **instrument)
    started = time.monotonic()
    code = main(["run", str(plan), "--serial", "H-1"])
    elapsed = time.monotonic() - started
    return code, capsys.readouterr().err, elapsed


def test_an_honest_fake_gives_a_capture(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    with FakeInstrument("honest") as fake:
        code, err, _ = run_against(fake, tmp_path, capsys)
    assert code == 0, err
    assert len(list((tmp_path / "out").glob("hostile-*.s1p"))) == 1


# mode -> (words in the one line, the deadline in seconds the run must end within)
CASES = {
    # refused before any sweep: 3600 s is over the default bound of 120 s
    "slow_claim": ("claims a sweep takes 3600 s, more than instrument.max_sweep_time", 3.0),
    # 0.3 s is believed: the trace may take timeout + 2 x 0.3 s, then it is given up
    "liar": ("no complete reply to ':INIT:IMM;*WAI;:TRAC:DATA? S11'", 1.1 + 3.0),
    "flood": ("refused every data format tried (real64: ':FORM:DATA REAL,64' raised -350", 3.0),
    "truncate": ("':INIT:IMM;*WAI;:TRAC:DATA? S11'", 1.1 + 3.0),
    "silent": ("no complete reply to ':SENS:AVER:COUN?'", TIMEOUT_S + 3.0),
    "garbage": ("':INIT:IMM;*WAI;:TRAC:DATA? S11'", 3.0),
    "wrong_length": ("':INIT:IMM;*WAI;:TRAC:DATA? S11'", 3.0),
    "huge_header": ("':INIT:IMM;*WAI;:TRAC:DATA? S11'", 1.1 + 3.0),
    "endless_line": ("':SENS:SWE:TIME?'", TIMEOUT_S + 3.0),
}


@pytest.mark.parametrize("mode", sorted(CASES))
def test_each_hostile_mode_is_one_line_and_exit_2_in_time(
    mode: str, tmp_path: Path, capsys: pytest.CaptureFixture
) -> None:
    words, deadline = CASES[mode]
    threads, fds = threading.active_count(), open_fds()
    with FakeInstrument(mode) as fake:
        code, err, elapsed = run_against(fake, tmp_path, capsys)
    lines = err.strip().splitlines()
    assert code == 2, err
    assert len(lines) == 1 and lines[0].startswith("sweepd: error: "), err
    assert words in lines[0], lines[0]
    assert len(lines[0]) < 600, f"{len(lines[0])} characters"
    assert elapsed < deadline, f"{mode}: took {elapsed:.2f} s"
    assert not list((tmp_path / "out").glob("*.s1p"))
    time.sleep(0.05)
    assert threading.active_count() <= threads
    assert open_fds() <= fds + 2  # the journal's SQLite files may stay cached


def test_a_raised_bound_lets_a_slow_sweep_time_through(
    tmp_path: Path, capsys: pytest.CaptureFixture
) -> None:
    # 3600 s is believed when the plan allows it; the fake then sends the data at once.
    with FakeInstrument("slow_claim") as fake:
        code, err, _ = run_against(fake, tmp_path, capsys, max_sweep_time="2 h")
    assert code == 0, err


def test_a_flood_is_counted_not_spelled_out(tmp_path: Path, capsys: pytest.CaptureFixture
                                            ) -> None:
    with FakeInstrument("flood") as fake:
        _, err, _ = run_against(fake, tmp_path, capsys)
    # 64 reads per format tried (the dialect's max_entries), one entry shown for each
    # format, its text cut to 80 characters
    assert err.count("(+63 more)") == 3 and err.count('-350 "') == 3
    texts = re.findall(r'-350 "([^"]*)"', err)
    assert len(texts) == 3 and all(len(text) <= 80 for text in texts), texts


def test_polling_gives_up_at_the_sweep_time_aware_deadline(
    tmp_path: Path, capsys: pytest.CaptureFixture
) -> None:
    # A dialect that polls a condition register whose bit 4 means "sweeping".
    doc = yaml.safe_load((DIALECT_DIR / "scpi-generic.yaml").read_text())
    doc["trigger"] = {"command": ":INIT:IMM", "wait": "poll", "sweep_time_query":
                      ":SENS:SWE:TIME?", "poll": {"query": ":STAT:OPER:COND?", "done_bit": 4,
                                                  "done_when": "clear", "interval": 0.01}}
    dialect = tmp_path / "polling.yaml"
    dialect.write_text(yaml.safe_dump(doc))
    for mode, want in (("honest", 0), ("never_done", 2)):
        with FakeInstrument(mode) as fake:
            code, err, elapsed = run_against(fake, tmp_path, capsys, dialect=str(dialect))
        assert code == want, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "':STAT:OPER:COND?' still not done after 0.52 s" in lines[0]
    assert "sweep time 0.01 s" in lines[0]
    assert elapsed < TIMEOUT_S + 3.0
