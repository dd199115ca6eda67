"""Exit codes and one-line errors at the command line (issue 10.13 and 10.14).

Exit 1 means "failed verdict" to every caller, so no unexpected exception may ever end
in exit 1 (Python's own code for an uncaught exception): it is exit 2 with one line, the
traceback in the log at debug level (``-vv``).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from acquire.cli import main

UNIT = "# GHz S RI R 50\n2.3 0.1 0\n2.45 0.05 0\n2.6 0.1 0\n"


@pytest.fixture
def unit(tmp_path: Path) -> Path:
    path = tmp_path / "u.s1p"
    path.write_text(UNIT)
    return path


def _explode(*_args, **_kwargs):
    raise RuntimeError("something nobody foresaw\nwith a second line")


@pytest.mark.parametrize("error", [RuntimeError, KeyError, ZeroDivisionError, MemoryError,
                                   RecursionError, AssertionError])
def test_an_unexpected_exception_exits_2_with_one_line(monkeypatch, capsys, unit: Path,
                                                       error: type[BaseException]) -> None:
    def explode(*_args, **_kwargs):
        raise error("boom")

    monkeypatch.setattr("acquire.commands.check.read_sweep", explode)
    code = main(["check", str(unit), "--mask", "patch-2g45"])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and err.startswith(f"sweepd: error: internal error "
                                                   f"({error.__name__}")
    assert "Traceback" not in err


def test_the_traceback_goes_to_the_log_at_debug_level(monkeypatch, caplog, unit: Path) -> None:
    monkeypatch.setattr("acquire.commands.check.read_sweep", _explode)
    with caplog.at_level("DEBUG", logger="sweepd"):
        assert main(["check", str(unit), "--mask", "patch-2g45"]) == 2
    record = next(r for r in caplog.records if r.name == "sweepd")
    assert record.levelname == "DEBUG" and record.exc_info is not None


def test_with_json_an_unexpected_exception_is_still_one_document(monkeypatch, capsys,
                                                                 unit: Path) -> None:
    monkeypatch.setattr("acquire.commands.check.read_sweep", _explode)
    code = main(["check", str(unit), "--mask", "patch-2g45", "--json"])
    out, err = capsys.readouterr()
    if code == 2 and out.strip():
        doc = json.loads(out)
        assert doc["exit_code"] == 2 and doc["kind"] == "InternalError"
        assert "\n" not in doc["error"]
    assert code == 2 and err.count("\n") == 1


def test_a_real_unexpected_failure_in_a_subprocess_never_exits_1(tmp_path: Path) -> None:
    """A drawing library limit (a path too long to rasterise) is no verdict: exit 2."""
    from hostile_support import run_limited

    lines = ["# Hz S RI R 50"] + [
        f"{2.3e9 + k * 5e6:.1f} {1e200 if k % 2 else 1e-200} {-1e200 if k % 3 else 0}"
        for k in range(61)]
    path = tmp_path / "wild.s1p"
    path.write_text("\n".join(lines) + "\n")
    result = run_limited(["plot", str(path), "-o", str(tmp_path / "p.png")])
    assert result.returncode in (0, 2), result.stderr
    if result.returncode == 2:
        assert result.stderr.count("\n") == 1 and "Traceback" not in result.stderr


@pytest.mark.parametrize("argv", [
    ["check", "{unit}", "--mask", "pa\nb"],
    ["check", "{unit}", "--plan", "pa\nb"],
    ["check", "{dir}/w\nx.s1p", "--mask", "patch-2g45"],
    ["summary", "{dir}", "--since", "a\nb"],
])
def test_a_name_with_a_newline_gives_a_one_line_error(capsys, unit: Path, argv) -> None:
    argv = [a.format(unit=unit, dir=unit.parent) for a in argv]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "\\n" in err


@pytest.mark.parametrize("since", ["1e300 d", "1e10 d", "-5 h", "nan s", "inf h",
                                   "99999-01-01", "0001-01-01", "9999-12-31T23:59:59-14:00",
                                   "x" * 10_000])
def test_summary_since_absurd_values_are_one_line(tmp_path: Path, capsys, since: str) -> None:
    assert main(["summary", str(tmp_path), "--since", since]) == 2
    err = capsys.readouterr().err
    assert err.startswith("sweepd: error: --since ") and err.count("\n") == 1
    assert len(err) < 300


@pytest.mark.parametrize("value", ["0", "-1", "nan", "inf", "-inf", "1e999", "0.1", "x"])
def test_status_watch_refuses_non_positive_and_non_finite(capsys, value: str) -> None:
    with pytest.raises(SystemExit) as info:
        main(["status", f"--watch={value}"])
    assert info.value.code == 2
    assert "argument --watch: must be a number of seconds from 0.2 to 86400" in \
        capsys.readouterr().err


def test_status_watch_takes_a_sane_interval(tmp_path: Path, capsys) -> None:
    from acquire.commands.status import watch_seconds

    assert watch_seconds("2.5") == 2.5 and watch_seconds("0.2") == 0.2


def test_numpy_runtime_warnings_never_reach_stderr(unit: Path) -> None:
    """Outside pytest (which records warnings itself): a subprocess with a command that
    divides by zero in numpy and warns; stderr stays empty, -vv shows it in the log."""
    from hostile_support import run_limited

    code = ("import sys, warnings, numpy as np\n"
            "import acquire.commands.check as check_cmd\n"
            "def noisy(args):\n"
            "    np.log10(np.zeros(3))\n"
            "    warnings.warn('a stray warning', RuntimeWarning, stacklevel=1)\n"
            "    return 0\n"
            "check_cmd.run = noisy\n"
            "from acquire.cli import main\n"
            "sys.exit(main(sys.argv[1:]))\n")
    quiet = run_limited(["check", str(unit), "--mask", "patch-2g45"], code=code)
    assert quiet.returncode == 0 and quiet.stderr == ""
    loud = run_limited(["-vv", "check", str(unit), "--mask", "patch-2g45"], code=code)
    assert loud.returncode == 0 and "DEBUG sweepd.warnings: RuntimeWarning" in loud.stderr


def test_measure_json_prints_one_object_even_on_an_unexpected_exception(
        monkeypatch, capsys, tmp_path: Path) -> None:
    plan = tmp_path / "p.yaml"
    plan.write_text("plan: patch-check\n"
                    "instrument: {resource: \"TCPIP::127.0.0.1::5025::SOCKET\", "
                    "dialect: scpi-generic}\n"
                    "stimulus: {start: 2.3 GHz, stop: 2.6 GHz, points: 31, power: -10 dBm, "
                    "if_bandwidth: 1 kHz}\nmeasure: S11\n")
    monkeypatch.setattr("acquire.station.measure.measure_one", _explode)
    code = main(["measure", str(plan), "--serial", "PA-0001", "--json"])
    out, err = capsys.readouterr()
    doc = json.loads(out)
    assert code == 2 and "internal error (RuntimeError" in doc["error"]
    assert "\n" not in doc["error"] and err.count("\n") == 1
