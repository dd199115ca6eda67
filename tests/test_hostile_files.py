"""Hostile config files (issue 10): non-finite numbers, huge integers, alias bombs.

Each test here failed before its fix: a NaN limit made a check pass (IEEE 754: NaN
compares false with everything, so ``value > limit`` never fails), a 400-digit integer
raised OverflowError, and an alias bomb's error message took minutes and gigabytes.
"""

from __future__ import annotations

import math
import textwrap
from pathlib import Path

import numpy as np
import pytest

from acquire.calibration.kit import load_kit
from acquire.checks import BandwidthCheck, ResonanceCheck, WorstSwrCheck, evaluate_checks
from acquire.cli import main
from acquire.errors import ConfigError, MaskError
from acquire.masks import Limit, load_mask
from acquire.plan import load_plan
from acquire.sweep import Sweep
from acquire.touchstone import write_touchstone

F = np.linspace(2.3e9, 2.6e9, 301)


def antenna(f: np.ndarray, f0: float = 2.45e9, r: float = 45.0, q: float = 12.0) -> np.ndarray:
    """Series RLC antenna model (a textbook resonator, common practice) as S11."""
    ind = q * r / (2 * np.pi * f0)
    cap = 1 / ((2 * np.pi * f0) ** 2 * ind)
    w = 2 * np.pi * f
    z = r + 1j * (w * ind - 1 / (w * cap))
    return ((z - 50) / (z + 50)).reshape(-1, 1, 1)


@pytest.fixture
def unit_file(tmp_path: Path) -> Path:
    return write_touchstone(tmp_path / "unit.s1p", Sweep(F, antenna(F)))


def run_cli(argv: list[str], capsys) -> tuple[int, str, str]:
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


PLAN = """\
plan: patch-check
instrument: {resource: "TCPIP::127.0.0.1::5025::SOCKET", dialect: scpi-generic}
stimulus: {start: 2.3 GHz, stop: 2.6 GHz, points: 301, power: -10 dBm, if_bandwidth: 1 kHz}
measure: S11
"""


# -- 10.1: NaN and infinity never accepted, never a verdict -------------------------

@pytest.mark.parametrize("upper", [".nan", ".NaN", ".inf", "-.inf", "1.0e999", "nan"])
def test_mask_with_a_non_finite_limit_is_an_error_not_a_pass(
    tmp_path: Path, unit_file: Path, capsys, upper: str
) -> None:
    mask = tmp_path / "m.yaml"
    mask.write_text(f"quantity: swr\nsegments: [{{from: 2.4 GHz, to: 2.5 GHz, upper: {upper}}}]\n")
    code, out, err = run_cli(["check", str(unit_file), "--mask", str(mask)], capsys)
    assert code == 2, out
    assert "PASS" not in out
    assert err.count("\n") == 1 and "segments[0].upper: must be a" in err


@pytest.mark.parametrize("check", [
    "worst_swr: {band: [2.4 GHz, 2.5 GHz], at_most: .nan}",
    "bandwidth: {below_swr: .nan, at_least: 60 MHz}",
    "bandwidth: {below_swr: 2, at_least: .nan}",
    "bandwidth: {below_return_loss: .inf, at_least: 60 MHz}",
    "resonance: {within: [.nan, 2.5 GHz]}",
])
def test_plan_check_with_a_non_finite_number_is_an_error(
    tmp_path: Path, unit_file: Path, capsys, check: str
) -> None:
    plan = tmp_path / "p.yaml"
    plan.write_text(PLAN + f"checks:\n  - {check}\n")
    code, out, err = run_cli(["check", str(unit_file), "--plan", str(plan)], capsys)
    assert code == 2, out
    assert err.startswith("sweepd: error: plan ") and err.count("\n") == 1
    assert "must be a finite number" in err


def test_the_verdict_code_itself_refuses_nan_limits() -> None:
    # Built in code (not read from a file): still an error verdict, never a pass.
    sweep = Sweep(F, antenna(F))
    checks = [WorstSwrCheck(2.4e9, 2.5e9, math.nan), BandwidthCheck(math.nan, swr_max=2.0),
              BandwidthCheck(60e6, swr_max=math.nan), ResonanceCheck(math.nan, 2.5e9)]
    verdict = evaluate_checks(checks, sweep, metrics=False)
    assert [r.verdict for r in verdict.results] == ["error"] * 4, verdict.summary_line()
    assert verdict.exit_code == 2
    with pytest.raises(MaskError, match="finite"):
        Limit(math.nan, 2.0)


@pytest.mark.parametrize(("old", "new"), [
    ("c0: 49.4", "c0: .nan"),
    ("l1: -140.0", "l1: -.inf"),
    ("loss_gohm_per_s: 1.1", "loss_gohm_per_s: .nan"),
    ("delay: 29.0 ps", "delay: .nan"),
    ("r: 50 ohm", "r: .nan"),
])
def test_cal_kit_with_nan_is_refused(tmp_path: Path, old: str, new: str) -> None:
    from acquire.library import find_config

    text = find_config("calkits", "generic-sma-50").read_text()
    assert old in text
    kit = tmp_path / "kit.yaml"
    kit.write_text(text.replace(old, new, 1))
    with pytest.raises(ConfigError, match=r"kit\.yaml: standards\.\w+\.\w+\.\w+: must be a"):
        load_kit(kit)


# -- 10.8: huge integers in any number field ----------------------------------------

BIG = "9" * 400


@pytest.mark.parametrize(("key", "value"), [
    ("points", BIG), ("start", BIG), ("power", f"-{BIG}"), ("if_bandwidth", BIG),
    ("points", "1" * 5000),  # beyond Python's int-from-text digit limit
])
def test_huge_integer_in_a_plan_is_one_line(tmp_path: Path, key: str, value: str) -> None:
    plan = tmp_path / "p.yaml"
    plan.write_text(_set_stimulus(key, value))
    with pytest.raises(ConfigError) as info:
        load_plan(plan)
    message = str(info.value)
    assert "\n" not in message and len(message) < 300, message
    assert f"stimulus.{key}" in message or "out of range" in message


def _set_stimulus(key: str, value: str) -> str:
    stim = {"start": "2.3 GHz", "stop": "2.6 GHz", "points": "301", "power": "-10 dBm",
            "if_bandwidth": "1 kHz", key: value}
    body = ", ".join(f"{k}: {v}" for k, v in stim.items())
    return PLAN.replace(PLAN.splitlines()[2], f"stimulus: {{{body}}}")


@pytest.mark.parametrize("segment", [
    f"{{from: {BIG}, to: 2.5 GHz, upper: 2}}",
    f"{{from: 2.4 GHz, to: 2.5 GHz, upper: {BIG}}}",
    f"{{from: 2.4 GHz, to: 2.5 GHz, upper: 2, aperture: {BIG}}}",
])
def test_huge_integer_in_a_mask_is_one_line(tmp_path: Path, segment: str) -> None:
    mask = tmp_path / "m.yaml"
    mask.write_text(f"quantity: swr\nsegments: [{segment}]\n")
    with pytest.raises(MaskError) as info:
        load_mask(mask)
    assert "\n" not in str(info.value) and len(str(info.value)) < 300


def test_plan_touchstone_version_as_a_huge_integer(tmp_path: Path) -> None:
    plan = tmp_path / "p.yaml"
    plan.write_text(PLAN + f"output: {{touchstone: {{version: {'7' * 4000}}}}}\n")
    with pytest.raises(ConfigError, match=r"output\.touchstone\.version: must be 1\.1 or 2\.0"
                                          r", got an integer of 4000 digits$"):
        load_plan(plan)


def test_kits_plans_and_masks_read_text_numbers_the_yaml_way(tmp_path: Path) -> None:
    kit = tmp_path / "kit.yaml"
    kit.write_text(textwrap.dedent("""\
        kit: k
        frequency: {min: 0 Hz, max: 6 GHz}
        standards: {open: {capacitance: {c0: 1e1}}, short: , load: }
    """))
    assert load_kit(kit).standards["open"].capacitance_f[0] == pytest.approx(10e-15)


# -- 10.7: alias bombs and deep nesting ---------------------------------------------

def alias_bomb(levels: int = 9, width: int = 9) -> str:
    """The classic nested-alias document: ``width ** levels`` strings once expanded."""
    lines = ['a0: &a0 ["lol", "lol", "lol", "lol", "lol", "lol", "lol", "lol", "lol"]']
    for k in range(1, levels):
        refs = ", ".join([f"*a{k - 1}"] * width)
        lines.append(f"a{k}: &a{k} [{refs}]")
    return "\n".join(lines) + "\n"


BOMB = alias_bomb()


def _load_any(kind: str, path: Path):
    from drivers.dialect import load_dialect

    return {"plan": load_plan, "mask": load_mask, "kit": load_kit,
            "dialect": load_dialect}[kind](path)


@pytest.mark.parametrize("kind", ["plan", "mask", "kit", "dialect"])
@pytest.mark.parametrize(("text", "message"), [
    (BOMB, r"aliases expand to more than 10000 extra values"),
    ("plan: &x [*x]\n", r"an alias refers to the value that contains it|YAML"),
    ("a: " + "[" * 70 + "]" * 70 + "\n", r"nested too deeply \(at most 64 levels\)"),
    ("a: " + "[" * 5000 + "]" * 5000 + "\n", r"nested too deeply \(at most 64 levels\)"),
    ("a: " + "{b: " * 3000 + "1" + "}" * 3000 + "\n", r"nested too deeply \(at most 64 levels\)"),
    (f"a: {'9' * 5000}\n", r"value out of range"),
    ("a: 2020-99-99\n", r"value out of range"),
    ("\x00lan: x\n", r"YAML error: unacceptable character #x0000"),  # found by the fuzz suite
])
def test_hostile_yaml_is_one_line_for_every_file_kind(tmp_path: Path, kind: str, text: str,
                                                      message: str) -> None:
    from drivers.errors import SweepdError

    path = tmp_path / f"{kind}.yaml"
    path.write_text(text)
    with pytest.raises(SweepdError, match=message) as info:
        _load_any(kind, path)
    assert "\n" not in str(info.value) and len(str(info.value)) < 400


def test_a_small_alias_bomb_under_the_limit_still_loads_and_reports_briefly(
        tmp_path: Path) -> None:
    # About 1,700 values once expanded: allowed by the loader; the plan check then names
    # the value briefly (the old message called repr() on the whole value first).
    path = tmp_path / "p.yaml"
    path.write_text(alias_bomb(levels=3) + PLAN.replace("plan: patch-check", "plan: *a2"))
    with pytest.raises(ConfigError) as info:
        load_plan(path)
    message = str(info.value)
    assert "unknown key 'a0'" in message or "plan: must be a non-empty string" in message
    assert len(message) < 400


def test_the_bomb_from_the_report_fails_fast_in_a_subprocess(tmp_path: Path) -> None:
    """The 467-byte plan that took 55 s and 3.1 GB: now one line, under a 512 MiB cap."""
    from hostile_support import run_limited

    path = tmp_path / "bomb.yaml"
    path.write_text(alias_bomb() + PLAN.replace("plan: patch-check", "plan: *a8"))
    unit = tmp_path / "u.s1p"
    unit.write_text("# GHz S RI R 50\n2.4 0 0\n2.5 0 0\n")
    result = run_limited(["check", str(unit), "--plan", str(path)], memory_mb=512, timeout=30)
    assert result.returncode == 2, result.stderr
    assert result.stderr.count("\n") == 1 and "aliases expand" in result.stderr


@pytest.mark.parametrize(("section", "message"), [
    ("calibration: {method: one-port, kit: generic-sma-50, max_age: 1e300 s}",
     r"calibration\.max_age: must be from 1 s to 3\.16224e\+09 s"),
    ("stimulus: {start: 1e300 Hz, stop: 2e300 Hz, points: 3, power: 0 dBm, "
     "if_bandwidth: 1 kHz}", r"stimulus\.start: must be from 1 Hz to 1e\+15 Hz"),
])
def test_times_and_frequencies_have_a_range_even_when_a_field_gives_none(
        tmp_path: Path, section: str, message: str) -> None:
    plan = tmp_path / "p.yaml"
    key = section.split(":")[0]
    lines = [line for line in PLAN.splitlines() if not line.startswith(f"{key}:")]
    plan.write_text("\n".join([*lines, section]) + "\n")
    with pytest.raises(ConfigError, match=message):
        load_plan(plan)
