"""Two-port limits (insertion loss, return loss at both ports, group delay flatness).

Oracles: scikit-rf 2.2 ``Network.s_db`` and ``Network.group_delay`` on the same data,
and the definitions of Pozar, Microwave Engineering, 4th ed. (IL = −20·log10|S21|,
RL = −20·log10|Γ|, τ = −dφ/dω). The devices are the simulator's cable and band-pass
filter models (independent code).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import skrf as rf

from acquire.check_parse import parse_checks
from acquire.checks import evaluate_checks
from acquire.errors import PlanError
from acquire.plan import load_plan
from acquire.sweep import Sweep
from acquire.yamlfile import Node
from simulators.devices import make_device

ROOT = Path(__file__).resolve().parents[1]
F = np.linspace(10e6, 6e9, 601)


def _node(value):
    return Node(value, "plan lines/cable.yaml", "checks", PlanError, None)


def _verdict(entries, sweep):
    return evaluate_checks(parse_checks(_node(entries)), sweep, metrics=False)


def test_insertion_and_return_loss_against_scikit_rf() -> None:
    s = make_device("cable", loss_db_at_1ghz=0.9, z_ohm=56.0).s(F)
    net = rf.Network(frequency=rf.Frequency.from_f(F, unit="Hz"), s=s, z0=50)
    il = float(-net.s_db[:, 1, 0].min())
    rl = float(min(-net.s_db[:, 0, 0].max(), -net.s_db[:, 1, 1].max()))
    band = ["10 MHz", "6 GHz"]
    ok = _verdict([{"insertion_loss": {"band": band, "at_most": f"{il + 0.01} dB"}},
                   {"return_loss": {"band": band, "at_least": f"{rl - 0.01} dB"}}], Sweep(F, s))
    assert ok.verdict == "pass"
    il_result, rl_result = ok.results
    assert il_result.details["worst_db"] == pytest.approx(il, abs=1e-9)
    assert rl_result.details["ports"]["S11"]["worst_db"] == pytest.approx(
        -net.s_db[:, 0, 0].max(), abs=1e-9)
    bad = _verdict([{"insertion_loss": {"band": band, "at_most": f"{il - 0.01} dB"}},
                    {"return_loss": {"band": band, "at_least": f"{rl + 0.01} dB",
                                     "parameters": ["S22"]}}], Sweep(F, s))
    assert [r.verdict for r in bad.results] == ["fail", "fail"] and bad.exit_code == 1
    assert bad.results[1].name.startswith("return loss S22 ")
    json.loads(bad.to_json())


def test_group_delay_flatness_against_scikit_rf() -> None:
    s = make_device("bandpass-2g45").s(np.linspace(2.35e9, 2.55e9, 801))
    f = np.linspace(2.35e9, 2.55e9, 801)
    net = rf.Network(frequency=rf.Frequency.from_f(f, unit="Hz"), s=s, z0=50)
    inside = (f >= 2.42e9) & (f <= 2.48e9)
    gd = net.group_delay[:, 1, 0][inside].real  # scikit-rf: −dφ/dω by numpy.gradient
    spread = float(gd.max() - gd.min())
    entry = {"group_delay_flatness": {"band": ["2.42 GHz", "2.48 GHz"],
                                      "at_most": f"{spread * 1e9 * 1.001} ns"}}
    verdict = _verdict([entry], Sweep(f, s))
    assert verdict.verdict == "pass"
    assert verdict.results[0].details["spread_s"] == pytest.approx(spread, rel=1e-9)
    entry["group_delay_flatness"]["at_most"] = f"{spread * 1e9 * 0.999} ns"
    assert _verdict([entry], Sweep(f, s)).verdict == "fail"
    cable = make_device("cable-1m").s(F)
    flat = _verdict([{"group_delay_flatness": {"band": ["10 MHz", "6 GHz"], "at_most": "1 ps",
                                               "aperture": 5}}], Sweep(F, cable))
    assert flat.verdict == "pass"  # a uniform line: constant delay


def test_two_port_checks_on_a_one_port_sweep_are_errors_not_passes() -> None:
    s11 = np.full((F.size, 1, 1), 0.1 + 0j)
    verdict = _verdict([{"insertion_loss": {"band": ["10 MHz", "6 GHz"], "at_most": "3 dB"}},
                        {"return_loss": {"band": ["10 MHz", "6 GHz"], "at_least": "10 dB"}}],
                       Sweep(F, s11))
    assert [r.verdict for r in verdict.results] == ["error", "error"]
    assert "needs S21 but the sweep has 1 port(s)" in verdict.results[0].message
    assert verdict.exit_code == 2


@pytest.mark.parametrize(("entry", "message"), [
    ({"insertion_loss": {"band": ["1 GHz", "2 GHz"], "at_most": "-3 dB"}},
     "checks\\[0\\].insertion_loss.at_most.*positive dB"),
    ({"return_loss": {"band": ["1 GHz", "2 GHz"], "at_least": "15 dB", "parameters": ["S21"]}},
     "checks\\[0\\].return_loss.parameters\\[0\\]"),
    ({"group_delay_flatness": {"band": ["1 GHz", "2 GHz"], "at_most": "1 ns",
                               "aperture": 4}}, "odd number of points, got 4"),
    ({"insertion_loss": {"band": ["2 GHz", "1 GHz"], "at_most": "3 dB"}}, "lies above"),
])
def test_bad_entries_name_the_key(entry, message) -> None:
    with pytest.raises(PlanError, match=message) as info:
        parse_checks(_node([entry]))
    assert "\n" not in str(info.value) and "plan lines/cable.yaml" in str(info.value)


def test_shipped_cable_assembly_plan_loads() -> None:
    plan = load_plan(ROOT / "configs" / "plans" / "cable-assembly.yaml")
    assert plan.ports == 2 and plan.calibration.method == "two-port"
    assert plan.calibration.isolation is True
    assert [c.kind for c in plan.checks] == ["mask", "insertion_loss", "return_loss",
                                            "group_delay_flatness"]
