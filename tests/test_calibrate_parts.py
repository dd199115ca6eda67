"""Parts of the guided calibration: keys and scripts, the progress line, the switch
command connector (real processes, no shell), the unfinished-calibration file, thru checks.
"""

from __future__ import annotations

import io
import json
import shlex
import sys
import zipfile
from pathlib import Path

import numpy as np
import pytest

from acquire.calibration import load_kit
from acquire.calibration.model import OnePortTerms
from acquire.errors import CalError
from acquire.guided.connectors import CommandConnector, FixtureError, ManualConnector
from acquire.guided.console import Console
from acquire.guided.judge import Judge
from acquire.guided.keys import (
    ABORT,
    BACK,
    GOTO,
    HELP,
    KEEP,
    PROCEED,
    REDO,
    Action,
    parse_key,
    parse_script,
)
from acquire.guided.partial import Fingerprint, Partial, load_partial, partial_path, readings_fit
from acquire.guided.progress import progress_line
from acquire.guided.steps import build_steps
from drivers.stimulus import Stimulus

STIM = Stimulus(2.3e9, 2.6e9, 31, -10.0, 1e3)


def test_terminal_keys() -> None:
    assert parse_key("\n") == Action(PROCEED)
    assert parse_key(" B ") == Action(BACK)
    assert parse_key("r") == Action(REDO)
    assert parse_key("a") == parse_key("q") == Action(ABORT)
    assert parse_key("?") == parse_key("h") == Action(HELP)
    assert parse_key("2") == Action(GOTO, step=2)
    assert parse_key("0") is None and parse_key("yes") is None


def test_script_items() -> None:
    assert parse_script("short, keep,b  2 enter dut") == (
        Action(PROCEED, connect="short"), Action(PROCEED, connect=KEEP), Action(BACK),
        Action(GOTO, step=2), Action(PROCEED), Action(PROCEED, connect="device"))
    with pytest.raises(CalError, match=r"^--script: item 2 'opne' is not a standard"):
        parse_script("open opne")


def test_progress_line_unicode_and_ascii() -> None:
    items = [("open", "done"), ("short", "pending"), ("load", "pending")]
    assert progress_line(2, "SHORT", items) == "[2/3] SHORT  ✓open  ·short  ·load"
    assert progress_line(2, "SHORT", items, ascii_only=True) == "[2/3] SHORT  +open  .short  .load"
    assert progress_line(0, "SAVE", [("open", "repeat")], ascii_only=True) == "[done] SAVE  xopen"


def test_console_falls_back_to_ascii_for_an_ascii_stream() -> None:
    raw = io.BytesIO()
    stream = io.TextIOWrapper(raw, encoding="ascii")
    console = Console(stream)
    assert console.ascii_only
    console.say("[1/3] OPEN  ·open", "|ΔΓ| ≤ 0.01 at −40 dB, ±1°")
    stream.flush()
    assert raw.getvalue().decode("ascii").splitlines()[1] == "|dG| <= 0.01 at -40 dB, +/-1 deg"


def _recorder(tmp_path: Path, exit_code: int = 0) -> str:
    script = tmp_path / "record.py"
    script.write_text(
        "import json, sys\n"
        f"open({str(tmp_path / 'argv.json')!r}, 'w').write(json.dumps(sys.argv[1:]))\n"
        f"print('relay bank 2 busy', file=sys.stderr)\nsys.exit({exit_code})\n")
    return f"{shlex.quote(sys.executable)} {shlex.quote(str(script))}"


def test_switch_command_runs_without_a_shell(tmp_path: Path) -> None:
    connector = CommandConnector(_recorder(tmp_path) + " connect {standard} ';' touch pwned")
    connector.connect("load")
    assert json.loads((tmp_path / "argv.json").read_text()) == [
        "connect", "load", ";", "touch", "pwned"]
    assert not (tmp_path / "pwned").exists()
    with pytest.raises(CalError, match="not a fixture position"):
        connector.connect("load; rm -rf x")


def test_switch_command_failures_are_one_line(tmp_path: Path) -> None:
    failing = CommandConnector(_recorder(tmp_path, exit_code=4) + " {standard}")
    with pytest.raises(FixtureError, match=r"failed with exit status 4: relay bank 2 busy$"):
        failing.connect("open")
    missing = CommandConnector("no-such-relay-tool-here {standard}")
    with pytest.raises(FixtureError, match=r"program 'no-such-relay-tool-here' not found"):
        missing.connect("open")
    with pytest.raises(CalError, match=r"must contain \{standard\}"):
        CommandConnector("fixturectl connect open")
    with pytest.raises(CalError, match="cannot split it"):
        CommandConnector("fixturectl 'connect {standard}")
    ManualConnector().connect("thru")


def _fingerprint(**change: object) -> Fingerprint:
    base = dict(plan="patch", method="one-port", instrument="sim,a,1,1", stimulus=STIM,
                kit_name="generic-sma-50", kit_sha256="ab" * 32)
    return Fingerprint(**{**base, **change})


def test_partial_file_round_trip_and_refusals(tmp_path: Path) -> None:
    rng = np.random.default_rng(3)
    partial = Partial(_fingerprint(), freq_hz=STIM.frequencies())
    partial.readings["open"] = {"S11": rng.standard_normal(31) + 1j * rng.standard_normal(31)}
    partial.status["open"] = "repeat"
    path = partial.save(partial_path(tmp_path, "patch"))
    assert path.name == "patch.partial-cal"
    back = load_partial(path)
    np.testing.assert_array_equal(back.readings["open"]["S11"], partial.readings["open"]["S11"])
    np.testing.assert_array_equal(back.freq_hz, STIM.frequencies())
    assert back.status == {"open": "repeat"} and back.fingerprint == partial.fingerprint
    assert back.mismatch(_fingerprint(), 3600) == ""
    assert back.mismatch(_fingerprint(instrument="sim,b,2,1"), 3600) == \
        "it was made with another instrument"
    back.updated_utc = "2020-01-01T00:00:00.000000Z"
    assert back.mismatch(_fingerprint(), 3600).startswith("it is ")
    assert readings_fit(back, {"open": ("S11",)}, 31) == ""
    assert "lacks S11 on 41 points" in readings_fit(back, {"open": ("S11",)}, 41)
    assert "a step 'open' this method does not have" in readings_fit(back, {"thru": ()}, 31)


def test_damaged_partial_file_is_one_line(tmp_path: Path) -> None:
    bad = tmp_path / "x.partial-cal"
    bad.write_bytes(b"PK\x03\x04 truncated")
    with pytest.raises(CalError, match=r"^unfinished calibration .*: damaged or unreadable"):
        load_partial(bad)
    with zipfile.ZipFile(bad, "w") as zf:
        zf.writestr("header.json", json.dumps({"format": "other", "version": 1}))
    with pytest.raises(CalError, match="not a version 1 sweepd-partial-cal file"):
        load_partial(bad)


def test_thru_checks_on_synthetic_readings() -> None:
    """Readings through a known 3-term error box (forward model: R. B. Marks, 50th ARFTG
    Digest, 1997): a thru whose port-1 side sees an open end is named; a good one passes."""
    kit = load_kit("generic-sma-50")
    steps = build_steps("one-path-two-port", kit, ports=2)
    f = STIM.frequencies()
    w = 2 * np.pi * f
    box = OnePortTerms(0.03 * np.exp(-1j * w * 0.3e-9), 0.08 * np.exp(-1j * w * 0.5e-9),
                       0.7 * np.exp(-1j * w * 4e-9))
    held = {n: {"S11": box.embed(kit.reflection(n, f))} for n in ("open", "short", "load")}
    judge = Judge(f, kit, steps)
    assert judge.readings(held).passed
    good = {**held, "thru": {"S21": 0.6 * np.exp(-1j * w * 4e-9), "S11": box.embed(0.05 + 0 * f)}}
    assert judge.readings(good).passed
    loose = {**held, "thru": {"S21": good["thru"]["S21"], "S11": box.embed(0.95 + 0 * f)}}
    (finding,) = judge.readings(loose).failures
    assert finding.check == "thru-match" and finding.steps == ("thru",)
    assert "port 1 sees |S11| = 0.95" in finding.message
    missing = {**held, "thru": {"S21": 1e-3 + 0 * f, "S11": box.embed(0.95 + 0 * f)}}
    (finding,) = judge.readings(missing).failures
    assert finding.check == "thru-level" and "reads S21 at -60 dB" in finding.message


def test_help_works_and_the_command_module_stays_light() -> None:
    import subprocess

    root = Path(__file__).resolve().parents[1]
    code = ("import sys, acquire.commands.calibrate\n"
            "heavy = {'numpy', 'yaml', 'pyvisa', 'matplotlib'} & set(sys.modules)\n"
            "assert not heavy, heavy\n"
            "from acquire.cli import main\n"
            "main(['calibrate', '--help'])\n")
    done = subprocess.run([sys.executable, "-c", code], cwd=root, capture_output=True,
                          text=True, timeout=60, check=False)
    assert done.returncode == 0, done.stderr
    assert "usage: sweepd calibrate" in done.stdout and "--prompt" in done.stdout
    assert "backends (plan: calibration.prompt" in done.stdout
