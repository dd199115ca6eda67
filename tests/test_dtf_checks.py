"""Distance-domain checks, distance masks, cable files, the plan's dtf section, sweepd dtf.

Data: the closed-form lossy-line cascade of tests/dtf_line.py (Pozar, table 4.1), so the
expected reflections are known: a 50 -> 60 ohm step at 12.3 m (-20.8 dB) and a 60 ->
40 ohm load at 32.3 m (-14.1 dB), plus their first multiple at 52.3 m (-48.9 dB).
"""

from __future__ import annotations

import json
import textwrap

import numpy as np
import pytest
from dtf_line import line_s11
from schema_support import one_json_object, validate

from acquire.check_parse import parse_checks
from acquire.checks import evaluate_checks
from acquire.cli import main
from acquire.errors import ConfigError, MaskError, PlanError
from acquire.plan import load_plan
from acquire.sweep import Sweep
from acquire.timedomain.cable import load_cable
from acquire.timedomain.checks import DistanceCheck
from acquire.yamlfile import Node

F = np.arange(1, 1001) * 1e6
S11 = line_s11(F, [(50.0, 12.3), (60.0, 20.0)], 40.0, 0.66, 0.0)
PLAN_HEAD = """\
plan: feeder-a
instrument: {resource: "TCPIP::127.0.0.1::5025::SOCKET"}
stimulus: {start: 1 MHz, stop: 1 GHz, points: 1000, power: -10 dBm, if_bandwidth: 1 kHz}
"""


def sweep() -> Sweep:
    return Sweep(F, S11.reshape(-1, 1, 1), (50.0,), {})


def checks(entries, base_dir=None):
    return parse_checks(Node(entries, "plan p.yaml", "checks", PlanError, base_dir))


def zones(line_rl: str):
    return [{"name": "connector", "from": "0 m", "to": "0.3 m", "lower": "10 dB"},
            {"name": "line", "from": "0.3 m", "to": "end", "lower": line_rl}]


def test_zones_judge_each_reflection_by_where_it_lies() -> None:
    entry = {"distance": {"velocity_factor": 0.66, "zones": zones("25 dB")}}
    verdict = evaluate_checks(checks([entry]), sweep(), metrics=False)
    result = verdict.results[0]
    assert verdict.verdict == "fail" and result.kind == "distance"
    line = result.details["zones"][1]
    assert [round(p["distance_m"], 1) for p in line["failing_peaks"]] == [12.3, 32.3]
    assert line["worst"]["margin_db"] == pytest.approx(14.05 - 25.0, abs=0.3)
    assert result.details["zones"][0]["verdict"] == "pass"
    back = json.loads(verdict.to_json())
    assert back["checks"][0]["axis"]["alias_free_range_m"] == pytest.approx(98.93, abs=0.01)
    loose = {"distance": {"velocity_factor": 0.66, "zones": zones("12 dB")}}
    assert evaluate_checks(checks([loose]), sweep(), metrics=False).verdict == "pass"


def test_level_form_and_return_loss_form_are_the_same_limit() -> None:
    level = [{"from": "1 m", "to": "end", "quantity": "magnitude_db", "upper": "-18 dB"}]
    rl = [{"from": "1 m", "to": "end", "lower": "18 dB"}]
    a, b = (evaluate_checks(checks([{"distance": {"velocity_factor": 0.66, "zones": z}}]),
                            sweep(), metrics=False) for z in (level, rl))
    assert a.verdict == b.verdict == "fail"
    assert a.results[0].details["zones"][0]["worst"]["margin_db"] == pytest.approx(
        b.results[0].details["zones"][0]["worst"]["margin_db"])


def test_a_high_listing_floor_never_hides_a_failure() -> None:
    # The 52.3 m multiple (-48.9 dB) lies below the -30 dB floor but above the limit.
    entry = {"distance": {"velocity_factor": 0.66, "floor": "-30 dB", "zones": [
        {"from": "40 m", "to": "end", "lower": "55 dB"}]}}
    result = evaluate_checks(checks([entry]), sweep(), metrics=False).results[0]
    assert result.verdict == "fail"
    assert result.details["zones"][0]["worst"]["distance_m"] == pytest.approx(52.3, abs=0.1)
    assert all(p["level_db"] >= -30 for p in result.details["peaks"])


def test_a_zone_beyond_the_range_is_an_error_not_a_pass() -> None:
    entry = {"distance": {"velocity_factor": 0.66, "zones": [
        {"from": "1 m", "to": "150 m", "lower": "10 dB"}]}}
    verdict = evaluate_checks(checks([entry]), sweep(), metrics=False)
    assert verdict.verdict == "error" and verdict.exit_code == 2
    assert "beyond the shown range" in verdict.results[0].message


@pytest.mark.parametrize(("entry", "text"), [
    ({"zones": zones("30 dB")}, "needs a velocity factor"),
    ({"velocity_factor": 0.66, "mode": "lowpass", "zones": zones("30 dB")}, "harmonic"),
])
def test_checks_that_cannot_judge_give_error_results(entry, text) -> None:
    f = np.linspace(100e6, 1e9, 901)
    s = Sweep(f, line_s11(f, [(50.0, 5.0)], 75.0).reshape(-1, 1, 1), (50.0,), {})
    verdict = evaluate_checks(checks([{"distance": entry}]), s, metrics=False)
    assert verdict.verdict == "error" and text in verdict.results[0].message


@pytest.mark.parametrize(("entry", "text"), [
    ({"zones": [{"from": "1 m", "to": "end", "upper": "10 dB"}]}, "return_loss takes a lower"),
    ({"zones": [{"from": "1 m", "to": "end", "lower": "-30 dB"}]}, "return loss is positive"),
    ({"zones": [{"from": "5 m", "to": "2 m", "lower": "30 dB"}]}, "must lie beyond from"),
    ({"zones": [{"from": "5 furlongs", "to": "end", "lower": "3 dB"}]}, "unknown length unit"),
    ({"window": "kaiser-99", "zones": zones("30 dB")}, "window: unknown window"),
    ({"velocity_factor": 1.5, "zones": zones("30 dB")}, "velocity_factor: must be"),
    ({"zones": zones("30 dB"), "mask": "feeder-dtf"}, "exactly one of zones"),
    ({"zonez": []}, "unknown key 'zonez'"),
])
def test_bad_entries_name_the_plan_and_key(entry, text) -> None:
    with pytest.raises(PlanError, match=r"^plan p.yaml: checks\[0\].distance") as info:
        checks([{"distance": entry}])
    assert text in str(info.value) and "\n" not in str(info.value)


def test_shipped_distance_mask_and_cable() -> None:
    (check,) = checks([{"mask": "feeder-dtf"}])
    assert isinstance(check, DistanceCheck) and check.spec.cable.name == "solid-pe-50"
    cable = load_cable("solid-pe-50")
    assert cable.velocity_factor == 0.66
    # The fitted model passes near the listed points (a sqrt(f) + b f through 3 points).
    for freq, loss in cable.loss_points:
        assert cable.loss_db_per_m(freq) == pytest.approx(loss, rel=0.1)


def test_bad_cable_and_mask_files_name_the_file_and_key(tmp_path) -> None:
    (tmp_path / "c.yaml").write_text("cable: c\nvelocity_factor: 0.7\nloss: [{frequency: 1 GHz}]\n")
    with pytest.raises(ConfigError, match=r"cable .*c.yaml: loss\[0\].per_m: is required"):
        load_cable("c.yaml", tmp_path)
    (tmp_path / "m.yaml").write_text("domain: distance\nvelocity_factor: 0.7\nzones: 3\n")
    with pytest.raises(MaskError, match=r"mask .*m.yaml: zones: must be a list"):
        checks([{"mask": "m.yaml"}], tmp_path)


def test_plan_dtf_section_gives_defaults_the_check_entry_overrides(tmp_path) -> None:
    path = tmp_path / "p.yaml"
    path.write_text(PLAN_HEAD + textwrap.dedent("""\
        dtf: {velocity_factor: 0.80, window: hann, loss_per_m: 0.05 dB}
        checks:
          - mask: feeder-dtf
          - distance: {velocity_factor: 0.66, zones: [{from: 1 m, to: end, lower: 30 dB}]}
    """))
    mask_check, entry_check = load_plan(path).checks
    assert mask_check.spec.velocity_factor == 0.80  # plan section over the mask's settings
    assert mask_check.spec.transform.window == "hann"
    assert mask_check.spec.cable.name == "solid-pe-50"  # the mask's, not overridden
    assert entry_check.spec.velocity_factor == 0.66  # the entry's own key wins
    assert entry_check.spec.loss_db_per_m == 0.05
    path.write_text(PLAN_HEAD + "dtf: {velocity: 0.8}\n")
    with pytest.raises(PlanError, match=r"dtf: unknown key 'velocity'"):
        load_plan(path)


@pytest.fixture
def s1p(tmp_path):
    from acquire.touchstone import write_touchstone

    return write_touchstone(tmp_path / "feeder.s1p", sweep())


def test_sweepd_dtf_text_json_and_exit_codes(s1p, tmp_path, capsys) -> None:
    assert main(["dtf", str(s1p), "--velocity", "0.66"]) == 0
    out = capsys.readouterr().out
    assert "alias-free range 98.93 m" in out and "12.300 m" in out and "32.300 m" in out
    mask = tmp_path / "strict.yaml"
    mask.write_text("domain: distance\nzones: [{from: 0.3 m, to: end, lower: 30 dB}]\n")
    assert main(["dtf", str(s1p), "--velocity", "0.66", "--mask", str(mask), "--json",
                 "--trace"]) == 1
    body = validate(one_json_object(capsys.readouterr().out), "dtf")
    assert body["format"] == "sweepd-dtf" and body["verdict"] == "fail"
    assert [round(p["distance_m"], 2) for p in body["peaks"]] == [12.3, 32.3, 52.3]
    assert len(body["trace"]["distance_m"]) == len(body["trace"]["level_db"])
    assert body["checks"][0]["zones"][0]["verdict"] == "fail"


def test_sweepd_dtf_json_on_failure_is_the_error_document(s1p, capsys) -> None:
    assert main(["dtf", str(s1p), "--json", "--mode", "lowpass", "--velocity", "0.7",
                 "--padding", "0"]) == 2
    out, err = capsys.readouterr()
    doc = validate(one_json_object(out), "error")
    assert doc["command"] == "dtf" and "--padding" in doc["error"] and err.count("\n") == 1
    assert main(["dtf", str(s1p), "--json", "--velocity", "0.66", "--mask", "feeder-dtf"]) == 1
    good = validate(one_json_object(capsys.readouterr().out), "dtf")
    import jsonschema

    for bad in ({**good, "format": "sweepd-verdict"}, {**good, "peaks": [{"distance_m": -1}]},
                {**good, "axis": {**good["axis"], "mode": "timewarp"}}):
        with pytest.raises(jsonschema.ValidationError):
            validate(bad, "dtf")


def test_sweepd_dtf_errors_are_one_line_exit_2(s1p, tmp_path, capsys) -> None:
    assert main(["dtf", str(s1p)]) == 2
    assert "needs a velocity factor" in capsys.readouterr().err
    assert main(["dtf", str(s1p), "--velocity", "0.66", "--mask", "patch-2g45"]) == 2
    assert "frequency mask" in capsys.readouterr().err
    assert main(["dtf", str(s1p), "--velocity", "1.5"]) == 2
    assert "sweepd dtf: --velocity: must be from 0.01 to 1" in capsys.readouterr().err
    assert main(["dtf", str(s1p), "--velocity", "0.66", "-o", str(tmp_path / "x.pdf")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("sweepd: error:") and err.count("\n") == 1


def test_sweepd_dtf_plot_keeps_user_text_plain(s1p, tmp_path, capsys) -> None:
    out = tmp_path / "feeder.png"
    # Unbalanced math markup: matplotlib would fail to parse it if it were not escaped.
    assert main(["dtf", str(s1p), "--velocity", "0.66", "--mode", "lowpass",
                 "-o", str(out), "--title", r"feeder $\frac{ 3 $ A"]) == 0
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert f"picture: {out}" in capsys.readouterr().out


def test_titles_and_zone_names_are_drawn_as_typed() -> None:
    from acquire.timedomain.checks import Zone
    from acquire.timedomain.peaks import find_peaks
    from acquire.timedomain.plot import render
    from acquire.timedomain.spec import DtfSpec

    profile = DtfSpec(velocity_factor=0.66).profile(sweep())
    title, zone = r"line A \$ $x^2$ cost $5", "run $1 to $2"
    fig = render(profile, find_peaks(profile), title=title,
                 zones=(Zone(0, zone, 1.0, None, "return_loss", 20.0),))
    texts = [fig._suptitle, *(t for ax in fig.axes for t in ax.texts)]
    drawn = [t._preprocess_math(t.get_text()) for t in texts]  # what the library draws
    assert (title, False) in drawn and (zone, False) in drawn


def test_every_json_key_is_documented(s1p, capsys) -> None:
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    docs = (root / "README.md").read_text() + (root / "configs/masks/README.md").read_text()
    main(["dtf", str(s1p), "--mask", "feeder-dtf", "--json", "--trace"])
    body = json.loads(capsys.readouterr().out)
    check = body["checks"][0]
    failing = next(z for z in check["zones"] if z["failing_peaks"])
    keys = {*body, *body["settings"], *body["axis"], *body["axis"]["window"],
            *body["axis"]["loss"], *body["peaks"][0], *body["trace"], *check,
            *failing, *failing["failing_peaks"][0], *check["mask"]}
    missing = sorted(k for k in keys if f"`{k}`" not in docs and f'"{k}"' not in docs)
    assert not missing


def test_sweepd_check_takes_a_distance_mask(s1p, capsys) -> None:
    # sweepd check reads distance masks too (before, 'domain' was an unknown mask key).
    assert main(["check", str(s1p), "--mask", "feeder-dtf", "--json"]) == 1
    doc = validate(one_json_object(capsys.readouterr().out), "verdict")
    assert doc["checks"][0]["kind"] == "distance"
    assert doc["checks"][0]["mask"]["name"] == "feeder-dtf"


def test_lengths_in_engineering_units() -> None:
    from acquire.units import parse_quantity

    # 1 ft = 0.3048 m exactly (international foot, 1959).
    assert parse_quantity("12 ft", "length") == pytest.approx(3.6576)
    assert parse_quantity("30 cm", "length") == pytest.approx(0.3)
    assert parse_quantity(2, "length") == 2.0
    with pytest.raises(ValueError, match="unknown length unit 'yd'"):
        parse_quantity("3 yd", "length")
