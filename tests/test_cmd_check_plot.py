"""``sweepd check`` and ``sweepd plot`` on real Touchstone files.

Files come from two writers: scikit-rf (an outside implementation of the Touchstone
File Format Specification, used here as an oracle only) and our own writer. The same
data must give the same verdict whichever wrote it.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import textwrap

import numpy as np
import pytest

from acquire.commands import check as check_cmd
from acquire.commands import plot as plot_cmd
from acquire.errors import ConfigError
from acquire.plotting import PlotError
from acquire.sweep import Sweep


def antenna(f, f0=2.45e9, r=45.0, q=12.0):
    ind = q * r / (2 * np.pi * f0)
    cap = 1 / ((2 * np.pi * f0) ** 2 * ind)
    w = 2 * np.pi * np.asarray(f)
    z = r + 1j * (w * ind - 1 / (w * cap))
    return (z - 50) / (z + 50)


F = np.linspace(2.3e9, 2.6e9, 301)


def parse(module, argv):
    parser = argparse.ArgumentParser(prog=f"sweepd {module.__name__.rsplit('.', 1)[-1]}")
    module.add_arguments(parser)
    return parser.parse_args(argv)


def run(module, argv):
    return module.run(parse(module, argv))


@pytest.fixture
def touchstone():
    """Our Touchstone module; the command tests need its reader and writer."""
    import acquire.touchstone as ts

    return ts


def skrf_file(tmp_path, name, s, f=F):
    """Write a Touchstone file with scikit-rf (the outside writer)."""
    import skrf as rf
    s = np.asarray(s)
    if s.ndim == 1:
        s = s.reshape(-1, 1, 1)
    net = rf.Network(frequency=rf.Frequency.from_f(f, unit="Hz"), s=s, z0=50, name=name)
    net.write_touchstone(filename=name, dir=str(tmp_path))
    return tmp_path / f"{name}.s{s.shape[1]}p"


def test_command_modules_import_light():
    code = ("import sys, acquire.commands.check, acquire.commands.plot; "
            "heavy = {'numpy', 'matplotlib', 'yaml', 'pyvisa'} & set(sys.modules); "
            "assert not heavy, heavy")
    subprocess.run([sys.executable, "-c", code], check=True)


def test_check_needs_a_mask_or_plan(tmp_path):
    with pytest.raises(ConfigError, match="nothing to judge against"):
        run(check_cmd, [str(tmp_path / "x.s1p")])


def test_check_unknown_mask_is_a_clear_error(tmp_path):
    with pytest.raises(ConfigError, match="no mask named 'patch-9g'"):
        run(check_cmd, [str(tmp_path / "x.s1p"), "--mask", "patch-9g"])


def test_plot_refuses_other_suffixes(tmp_path):
    with pytest.raises(PlotError, match=r"must end in \.png or \.svg"):
        run(plot_cmd, [str(tmp_path / "x.s1p"), "-o", str(tmp_path / "x.pdf")])


def test_check_pass_and_fail_exit_codes(tmp_path, touchstone, capsys):
    good = skrf_file(tmp_path, "good", antenna(F))
    bad = skrf_file(tmp_path, "bad", antenna(F, f0=2.48e9))
    assert run(check_cmd, [str(good), "--mask", "patch-2g45"]) == 0
    out = capsys.readouterr().out
    assert out.startswith(f"{good}: PASS") and "resonance 2.45 GHz" in out
    assert run(check_cmd, [str(bad), "--mask", "patch-2g45", "--mask", "patch-2g45"]) == 1
    out = capsys.readouterr().out
    assert out.startswith(f"{bad}: FAIL") and "fails 2.4 GHz.." in out


def test_check_json_verdict(tmp_path, touchstone, capsys):
    path = skrf_file(tmp_path, "unit", antenna(F, f0=2.48e9))
    assert run(check_cmd, [str(path), "--mask", "patch-2g45", "--json"]) == 1
    verdict = json.loads(capsys.readouterr().out)
    assert verdict["format"] == "sweepd-verdict" and verdict["verdict"] == "fail"
    assert verdict["exit_code"] == 1 and verdict["sweep"]["source"] == str(path)
    seg = verdict["checks"][0]["segments"][0]
    assert seg["worst"]["freq_hz"] == pytest.approx(2.4e9)


def test_mask_outside_the_file_sweep_is_exit_2(tmp_path, touchstone, capsys):
    path = skrf_file(tmp_path, "unit", antenna(F))
    assert run(check_cmd, [str(path), "--mask", "whip-915"]) == 2
    assert "is not inside the sweep" in capsys.readouterr().out


def test_same_verdict_for_a_scikit_rf_file_and_our_own(tmp_path, touchstone, capsys):
    f = np.linspace(10e6, 6e9, 601)
    s = np.zeros((f.size, 2, 2), complex)
    s[:, 0, 0] = s[:, 1, 1] = 0.08 * np.exp(1j * f / 3e8) * (1 + f / 6e9)  # fails at 6 GHz
    s[:, 1, 0] = s[:, 0, 1] = 10 ** (-2.0 * np.sqrt(f / 6e9) / 20) * np.exp(-2j * np.pi * f * 3e-9)
    theirs = skrf_file(tmp_path, "theirs", s, f)
    ours = _write_ours(touchstone, tmp_path / "ours.s2p", Sweep(f, s))
    verdicts = []
    for path in (theirs, ours):
        code = run(check_cmd, [str(path), "--mask", "cable-6g", "--json"])
        verdicts.append((code, json.loads(capsys.readouterr().out)))
    (code_a, a), (code_b, b) = verdicts
    assert code_a == code_b == 1 and a["verdict"] == b["verdict"] == "fail"
    for seg_a, seg_b in zip(a["checks"][0]["segments"], b["checks"][0]["segments"], strict=True):
        assert seg_a["verdict"] == seg_b["verdict"]
        assert seg_a["worst"]["freq_hz"] == pytest.approx(seg_b["worst"]["freq_hz"], rel=1e-9)
        assert seg_a["worst"]["value"] == pytest.approx(seg_b["worst"]["value"], abs=1e-6)
        assert seg_a["positions_failed"] == seg_b["positions_failed"]


def _write_ours(touchstone, path, sweep):
    """Our writer, in another layout than scikit-rf's (2.0 keywords, dB/angle, GHz)."""
    import inspect

    params = inspect.signature(touchstone.write_touchstone).parameters
    kwargs = {}
    if "options" in params and hasattr(touchstone, "TouchstoneOptions"):
        kwargs["options"] = touchstone.TouchstoneOptions(version="2.0", fmt="DB",
                                                         freq_unit="GHz")
    if "comments" in params:
        kwargs["comments"] = ["written by the sweepd test suite"]
    written = touchstone.write_touchstone(path, sweep, **kwargs)
    return written if written is not None else path


def test_check_with_plan_checks(tmp_path, touchstone, capsys):
    plan = tmp_path / "patch.yaml"
    plan.write_text(textwrap.dedent("""\
        plan: patch-check
        instrument: {resource: "TCPIP::127.0.0.1::5025::SOCKET", dialect: scpi-generic}
        stimulus: {start: 2.3 GHz, stop: 2.6 GHz, points: 301, power: -10 dBm,
                   if_bandwidth: 1 kHz}
        measure: S11
        checks:
          - mask: patch-2g45
          - bandwidth: {below_swr: 2.0, at_least: 60 MHz}
          - resonance: {within: [2.43 GHz, 2.47 GHz]}
    """))
    path = skrf_file(tmp_path, "unit", antenna(F))
    assert run(check_cmd, [str(path), "--plan", str(plan), "--json"]) == 0
    kinds = [c["kind"] for c in json.loads(capsys.readouterr().out)["checks"]]
    assert kinds == ["mask", "bandwidth", "resonance"]


def test_plot_command_default_output_and_exit_codes(tmp_path, touchstone, capsys):
    good = skrf_file(tmp_path, "good", antenna(F))
    bad = skrf_file(tmp_path, "bad", antenna(F, f0=2.48e9))
    assert run(plot_cmd, [str(good), "--mask", "patch-2g45"]) == 0
    assert capsys.readouterr().out.strip() == str(tmp_path / "good.png")
    assert (tmp_path / "good.png").read_bytes().startswith(b"\x89PNG")
    out = tmp_path / "bad.svg"
    assert run(plot_cmd, [str(bad), "--mask", "patch-2g45", "-o", str(out),
                          "--scale", "return-loss"]) == 1
    assert b"<svg" in out.read_bytes()[:2000]


def test_offline_check_repeats_the_capture_time_verdict(tmp_path, touchstone, capsys):
    # Capture time: judge the sweep, write the verdict into the Touchstone comments.
    from acquire.check_parse import mask_check
    from acquire.checks import evaluate_checks

    sweep = Sweep(F, antenna(F, f0=2.48e9), meta={"serial": "P-0007"})
    at_capture = evaluate_checks([mask_check("patch-2g45")], sweep)
    path = touchstone.write_touchstone(tmp_path / "P-0007.s1p", sweep,
                                       comments=at_capture.comment_lines())
    stored = touchstone.read_touchstone(path)
    assert "sweepd verdict: FAIL (exit 1)" in stored.comments
    # Offline: the same file, the same mask, the same verdict and worst position.
    assert run(check_cmd, [str(path), "--mask", "patch-2g45", "--json"]) == at_capture.exit_code
    offline = json.loads(capsys.readouterr().out)
    seg_now = offline["checks"][0]["segments"][0]
    seg_then = at_capture.to_dict()["checks"][0]["segments"][0]
    assert offline["verdict"] == at_capture.verdict == "fail"
    assert seg_now["worst"]["freq_hz"] == pytest.approx(seg_then["worst"]["freq_hz"], rel=1e-12)
    assert seg_now["worst"]["value"] == pytest.approx(seg_then["worst"]["value"], rel=1e-12)
    assert np.allclose(seg_now["failing_ranges_hz"], seg_then["failing_ranges_hz"], rtol=1e-12)


def test_check_with_a_plan_without_checks_says_so(tmp_path):
    plan = tmp_path / "bare.yaml"
    plan.write_text("plan: bare\ninstrument: {resource: 'TCPIP::127.0.0.1::5025::SOCKET', "
                    "dialect: scpi-generic}\nstimulus: {start: 2.3 GHz, stop: 2.6 GHz, "
                    "points: 11, power: -10 dBm, if_bandwidth: 1 kHz}\nmeasure: S11\n")
    with pytest.raises(ConfigError, match=r"plan .*bare.yaml has no checks") as info:
        run(check_cmd, [str(tmp_path / "x.s1p"), "--plan", str(plan)])
    assert "\n" not in str(info.value)
