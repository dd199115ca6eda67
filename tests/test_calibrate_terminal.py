"""``sweepd calibrate`` with the terminal backend, driven through real pipes.

The command runs as a child process talking to the in-process simulator over TCP; the
test plays the technician: it reads each prompt, changes what the simulated fixture
presents (``sim.bench.connect``) and presses keys on the child's stdin.
"""

from __future__ import annotations

import io
import os
import select
import subprocess
import sys
import time
from pathlib import Path
from typing import ClassVar

import numpy as np
import pytest
import yaml

from acquire.calibration import find_latest
from acquire.guided import Options, calibrate
from acquire.plan import load_plan
from simulators.server import SimServer

ROOT = Path(__file__).resolve().parents[1]
PLAN = ROOT / "configs" / "plans" / "patch-line-a.yaml"
PROMPT = "> "


class Child:
    """``sweepd calibrate`` as a child; ``until`` reads stdout up to a text and a prompt."""

    started: ClassVar[list[Child]] = []

    def __init__(self, *args: str) -> None:
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "acquire.cli", "calibrate", *args],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, cwd=ROOT,
            env=dict(os.environ, PYTHONIOENCODING="utf-8"),
        )
        self.buffer = ""
        Child.started.append(self)

    def until(self, text: str, timeout_s: float = 30.0) -> str:
        """Everything up to the first prompt after ``text``; consumed from the buffer."""
        deadline = time.monotonic() + timeout_s
        fd = self.proc.stdout.fileno()
        while True:
            at = self.buffer.find(text)
            end = self.buffer.find(PROMPT, at + len(text)) if at >= 0 else -1
            if end >= 0:
                chunk, self.buffer = self.buffer[:end + 2], self.buffer[end + 2:]
                return chunk
            left = deadline - time.monotonic()
            ended = self.proc.poll() is not None and not select.select([fd], [], [], 0)[0]
            if left <= 0 or ended:
                raise AssertionError(f"no prompt after {text!r}; output so far:\n{self.buffer}"
                                     f"\nstderr: {self.proc.stderr.read().decode()}")
            if select.select([fd], [], [], min(left, 0.5))[0]:
                data = os.read(fd, 65536)
                self.buffer += data.decode("utf-8")

    def key(self, text: str = "") -> None:
        self.proc.stdin.write(text.encode() + b"\n")
        self.proc.stdin.flush()

    def close_input(self) -> None:
        self.proc.stdin.close()
        self.proc.stdin = None

    def finish(self, timeout_s: float = 30.0) -> tuple[int, str, str]:
        out, err = self.proc.communicate(timeout=timeout_s)
        return self.proc.returncode, self.buffer + out.decode(), err.decode()


@pytest.fixture()
def sim():
    with SimServer(personality="generic", time_scale=0.0, noise=False) as server:
        yield server


@pytest.fixture(autouse=True)
def _no_stray_children():
    """A failing test must not leave a child waiting on its stdin."""
    before = set(Child.started)
    yield
    for child in set(Child.started) - before:
        if child.proc.poll() is None:
            child.proc.kill()
            child.proc.communicate(timeout=10)


def plan_in(folder: Path) -> Path:
    """The shipped plan copied into ``folder`` with ``output.dir: .``, so its cal store
    (cal/ in the plan's output folder) is ``folder/cal``."""
    path = folder / "patch-line-a.yaml"
    if not path.exists():
        data = yaml.safe_load(PLAN.read_text())
        data["output"]["dir"] = "."
        path.write_text(yaml.safe_dump(data))
    return path


def _calsets(out: Path) -> list[Path]:
    return sorted((out / "cal").glob("*.calset"))


def test_short_on_the_open_step_is_named_and_repeated(sim: SimServer, tmp_path: Path) -> None:
    """First calibration (no earlier cal): the duplicate shows once the short is in."""
    child = Child(str(plan_in(tmp_path)), "--resource", sim.tcp_resource)
    intro = child.until("[1/3] OPEN")
    assert "Reference plane: end of the test cable, at the fixture's SMA jack." in intro
    assert "transmitter power or DC" in intro and "ESD" in intro and "local codes" in intro
    assert "[1/3] OPEN  ·open  ·short  ·load" in intro
    sim.bench.connect("short")  # the technician grabs the wrong standard
    child.key()
    step2 = child.until("[2/3] SHORT")
    assert "✓ OPEN measured" in step2
    sim.bench.connect("short")
    child.key()
    message = child.until("[1/3] OPEN")
    assert "the OPEN and SHORT steps read the same" in message
    assert "Repeat: OPEN, SHORT." in message
    assert "[1/3] OPEN  ✗open  ✗short  ·load" in message
    sim.bench.connect("open")
    child.key()
    step3 = child.until("[3/3] LOAD")
    assert "[3/3] LOAD  ✓open  ✓short  ·load" in step3
    sim.bench.connect("load")
    child.key()
    end = child.until("[done] SAVE")
    assert "effective directivity" in end and "effective source match" in end
    child.key()
    code, output, err = child.finish()
    assert code == 0, err
    assert "saved:" in output
    assert len(_calsets(tmp_path)) == 1


def test_with_an_earlier_cal_the_wrong_standard_is_named_at_once(sim: SimServer,
                                                                 tmp_path: Path) -> None:
    plan = load_plan(plan_in(tmp_path))
    calibrate(plan, Options(resource=sim.tcp_resource, script=""),
              stdout=io.StringIO())
    child = Child(str(plan_in(tmp_path)), "--resource", sim.tcp_resource)
    assert "compared with the last calibration" in child.until("[1/3] OPEN")
    sim.bench.connect("short")
    child.key()
    message = child.until("[1/3] OPEN")
    assert "the standard on the OPEN step looks like a SHORT" in message
    assert "Repeat: OPEN." in message
    sim.bench.connect("open")
    child.key()
    child.until("[2/3] SHORT")
    sim.bench.connect("short")
    child.key()
    child.until("[3/3] LOAD")
    sim.bench.connect("load")
    child.key()
    child.until("[done] SAVE")
    child.key()
    code, _, err = child.finish()
    assert code == 0, err
    assert len(_calsets(tmp_path)) == 2
    latest = find_latest(tmp_path / "cal", plan.name)
    assert latest is not None and latest.figures["previous_cal"] is not None


def test_keys_help_back_goto_redo_and_abort(sim: SimServer, tmp_path: Path) -> None:
    child = Child(str(plan_in(tmp_path)), "--resource", sim.tcp_resource)
    child.until("[1/3] OPEN")
    child.key("?")
    helped = child.until("Keys")
    assert "b      back" in helped and "a      abort" in helped
    child.key("x")
    assert "unknown answer 'x'" in child.until("unknown")
    child.key("r")
    assert "nothing measured yet" in child.until("nothing")
    sim.bench.connect("open")
    child.key()
    child.until("[2/3] SHORT")
    child.key("b")  # back to OPEN; its reading stays
    assert "[1/3] OPEN  ✓open  ·short  ·load" in child.until("[1/3] OPEN")
    child.key("3")  # jump ahead to LOAD
    child.until("[3/3] LOAD")
    sim.bench.connect("load")
    child.key()
    child.until("[2/3] SHORT")  # the first step still missing
    child.key("r")  # measure LOAD again, at once
    redo = child.until("[2/3] SHORT")
    assert "✓ LOAD measured" in redo
    sim.bench.connect("short")
    child.key()
    child.until("[done] SAVE")
    child.key("a")
    code, _, err = child.finish()
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("sweepd: error: calibration aborted")
    assert "--resume" in lines[0]
    assert _calsets(tmp_path) == []  # aborted: no cal set, even with every step measured
    assert (tmp_path / "cal" / "patch-line-a.partial-cal").is_file()


def test_end_of_input_aborts_and_ascii_marks(sim: SimServer, tmp_path: Path) -> None:
    child = Child(str(plan_in(tmp_path)), "--resource", sim.tcp_resource,
                  "--ascii")
    assert "[1/3] OPEN  .open  .short  .load" in child.until("[1/3] OPEN")
    sim.bench.connect("open")
    child.key()
    assert "[2/3] SHORT  +open  .short  .load" in child.until("[2/3] SHORT")
    child.close_input()
    code, _, err = child.finish()
    assert code == 2
    assert "input ended" in err and len(err.strip().splitlines()) == 1
    assert _calsets(tmp_path) == []


def test_terminal_cal_then_run_corrects_the_device(sim: SimServer, tmp_path: Path) -> None:
    """Technician at the terminal, then ``sweepd run``: the corrected file matches truth."""
    from acquire.cli import main
    from acquire.touchstone import read_touchstone

    child = Child(str(plan_in(tmp_path)), "--resource", sim.tcp_resource)
    for label, std in (("[1/3] OPEN", "open"), ("[2/3] SHORT", "short"), ("[3/3] LOAD", "load")):
        child.until(label)
        sim.bench.connect(std)
        child.key()
    child.until("[done] SAVE")
    child.key()
    assert child.finish()[0] == 0
    sim.bench.connect("device")
    run_dir = tmp_path
    assert main(["run", str(plan_in(tmp_path)), "--resource", sim.tcp_resource,
                 "--output", str(run_dir)]) == 0
    (path,) = run_dir.glob("*.s1p")
    got = read_touchstone(path).to_sweep()
    truth = sim.bench.truth(got.freq_hz)[:, 0, 0]
    assert np.abs(got.param("S11") - truth).max() < 1e-3
