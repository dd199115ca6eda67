"""Limit masks: file validation, evaluation rules and edge cases.

The quantities judged are defined by Pozar, Microwave Engineering, 4th ed., ch. 2
(SWR, return loss, |S| in dB, impedance); limit values here are invented examples.
"""

from __future__ import annotations

import re
import textwrap

import numpy as np
import pytest

from acquire.errors import MaskError
from acquire.library import find_config
from acquire.masks import load_mask
from acquire.metrics import gamma_from_swr, swr
from acquire.sweep import Sweep


def write_mask(tmp_path, text, name="m.yaml"):
    path = tmp_path / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def swr_sweep(freq, swr_values):
    """A one-port whose SWR is given per point (real positive Γ)."""
    return Sweep(np.asarray(freq, float), gamma_from_swr(np.asarray(swr_values, float)) + 0j)


def db_sweep(freq, db_values, parameter="S11"):
    s = np.zeros((len(freq), 2, 2), complex)
    s[:, 0, 0] = 0.01
    s[:, 1, 0] = s[:, 0, 1] = 0.9
    s[:, 1, 1] = 0.01
    i, j = int(parameter[1]) - 1, int(parameter[2]) - 1
    s[:, i, j] = 10 ** (np.asarray(db_values, float) / 20)
    return Sweep(np.asarray(freq, float), s)


SWR_MASK = """\
    quantity: swr
    segments:
      - {name: band, from: 2.40 GHz, to: 2.50 GHz, upper: 2.0}
"""


@pytest.mark.parametrize("name", ["patch-2g45", "whip-915", "cable-6g"])
def test_shipped_masks_load(name):
    mask = load_mask(find_config("masks", name))
    assert mask.name == name and mask.segments and mask.description


def test_shipped_masks_state_quantity_and_sign_convention():
    for name in ("patch-2g45", "whip-915", "cable-6g"):
        text = find_config("masks", name).read_text()
        assert "quantity:" in text
    assert "positive dB" in find_config("masks", "whip-915").read_text()
    assert "negative for a passive" in find_config("masks", "cable-6g").read_text()


def test_every_point_inside_and_the_segment_ends_are_judged(tmp_path):
    mask = load_mask(write_mask(tmp_path, SWR_MASK))
    f = np.linspace(2.3e9, 2.6e9, 31)  # 10 MHz steps: 2.40 and 2.50 GHz are points
    result = mask.evaluate(swr_sweep(f, np.full(f.size, 1.5)))
    seg = result.segments[0]
    assert seg.verdict == "pass" and result.verdict == "pass"
    assert seg.points_judged == 11 and seg.freq_hz.size == 11  # ends coincide with points
    f2 = np.linspace(2.305e9, 2.605e9, 31)  # ends fall between points
    seg2 = mask.evaluate(swr_sweep(f2, np.full(f2.size, 1.5))).segments[0]
    assert seg2.points_judged == 10 and seg2.freq_hz.size == 12
    assert seg2.freq_hz[0] == 2.40e9 and seg2.freq_hz[-1] == 2.50e9


def test_failure_between_two_points_at_a_segment_edge_is_caught(tmp_path):
    # Points at 2.39 and 2.41 GHz: 2.39 is outside the segment (SWR 5, ignored), 2.41 is
    # inside and fine (SWR 1.2). Interpolated at the 2.40 GHz edge the SWR is 3.1: fail.
    mask = load_mask(write_mask(tmp_path, SWR_MASK))
    f = np.array([2.37e9, 2.39e9, 2.41e9, 2.45e9, 2.49e9, 2.51e9])
    sweep = swr_sweep(f, [5.0, 5.0, 1.2, 1.2, 1.2, 1.2])
    seg = mask.evaluate(sweep).segments[0]
    assert all(seg.values[(seg.freq_hz > 2.40e9)] <= 2.0)  # every sweep point passes
    assert seg.verdict == "fail"
    assert seg.worst.freq_hz == 2.40e9 and seg.worst.bound == "upper"
    assert seg.worst.value == pytest.approx(3.1, abs=0.01)
    assert seg.failing_ranges() == [(2.40e9, 2.40e9)]


def test_a_value_exactly_on_the_limit_passes(tmp_path):
    path = write_mask(tmp_path, """\
        quantity: magnitude_db
        segments:
          - {from: 1 GHz, to: 2 GHz, upper: -20 dB}
          - {from: 1 GHz, to: 2 GHz, lower: -20 dB}
    """)
    f = np.linspace(1e9, 2e9, 11)
    sweep = db_sweep(f, np.full(f.size, -20.0))
    assert float(20 * np.log10(np.abs(sweep.param("S11"))[0])) == -20.0  # exactly on it
    result = load_mask(path).evaluate(sweep)
    assert [s.verdict for s in result.segments] == ["pass", "pass"]
    assert result.segments[0].worst.margin == 0.0
    nudged = db_sweep(f, np.full(f.size, -20.0) + np.where(np.arange(11) == 4, 1e-9, 0))
    assert load_mask(path).evaluate(nudged).segments[0].verdict == "fail"


def test_on_the_limit_survives_unit_conversion_rounding(tmp_path):
    # SWR 1.3357142857142859 -> |Γ| -> SWR comes back one rounding step higher; the
    # point is still on the limit and passes (margin 0).
    s = 1.3357142857142859
    assert float(swr(gamma_from_swr(s))) > s
    text = f"quantity: swr\nsegments: [{{from: 1 GHz, to: 2 GHz, upper: {s!r}}}]\n"
    path = write_mask(tmp_path, text)
    seg = load_mask(path).evaluate(swr_sweep(np.linspace(1e9, 2e9, 5), [s] * 5)).segments[0]
    assert seg.verdict == "pass" and seg.worst.margin == 0.0


def test_sloped_limit_is_linear_between_segment_ends(tmp_path):
    path = write_mask(tmp_path, """\
        parameter: S21
        quantity: magnitude_db
        segments:
          - name: insertion
            from: 1 GHz
            to: 5 GHz
            lower: {from: -1 dB, to: -3 dB}
    """)
    f = np.linspace(1e9, 5e9, 9)
    # Limit at 3 GHz is -2 dB. Data -2.1 dB there fails although it would pass the
    # limit's low end (-3 dB); -1.9 dB at 1.5 GHz fails (limit -1.25 dB there).
    ok = db_sweep(f, np.linspace(-0.9, -2.9, 9), "S21")
    res = load_mask(path).evaluate(ok).segments[0]
    assert res.verdict == "pass"
    assert res.worst.margin == pytest.approx(0.1, abs=1e-12)
    data = np.linspace(-0.9, -2.9, 9)
    data[4] = -2.1
    bad = load_mask(path).evaluate(db_sweep(f, data, "S21")).segments[0]
    assert bad.verdict == "fail"
    assert bad.worst.freq_hz == 3e9 and bad.worst.limit == pytest.approx(-2.0)
    assert bad.worst.margin == pytest.approx(-0.1)


def test_sloped_limit_with_segment_end_between_points(tmp_path):
    # The limit is evaluated at the interpolated segment end too (value at 'to').
    path = write_mask(tmp_path, """\
        quantity: magnitude_db
        segments:
          - {from: 1 GHz, to: 2 GHz, upper: {from: -30 dB, to: -10 dB}}
    """)
    f = np.array([0.9e9, 1.5e9, 1.95e9, 2.05e9])
    sweep = db_sweep(f, [-40.0, -25.0, -11.0, -9.0])
    seg = load_mask(path).evaluate(sweep).segments[0]
    # At 2 GHz: data interpolated -10.0 dB, limit -10 dB: exactly on it, passes.
    # At 1 GHz: data -38.33 dB vs -30 dB. At 1.5 GHz: -25 vs -20 dB.
    assert seg.verdict == "pass"
    assert seg.freq_hz.tolist() == [1e9, 1.5e9, 1.95e9, 2e9]
    assert seg.values[-1] == pytest.approx(-10.0)
    assert seg.margins[-1] == pytest.approx(0.0, abs=1e-12)


def test_overlapping_segments_are_each_judged(tmp_path):
    path = write_mask(tmp_path, """\
        quantity: swr
        segments:
          - {name: wide, from: 2.40 GHz, to: 2.50 GHz, upper: 2.0}
          - {name: core, from: 2.44 GHz, to: 2.46 GHz, upper: 1.5}
    """)
    f = np.linspace(2.40e9, 2.50e9, 11)
    sweep = swr_sweep(f, [1.9, 1.9, 1.9, 1.9, 1.6, 1.4, 1.4, 1.9, 1.9, 1.9, 1.9])
    result = load_mask(path).evaluate(sweep)
    wide, core = result.segments
    assert wide.verdict == "pass" and core.verdict == "fail"
    assert result.verdict == "fail"
    assert core.worst.freq_hz == pytest.approx(2.44e9) and core.worst.value == pytest.approx(1.6)
    assert core.points_judged == 3


def test_mask_outside_the_sweep_is_an_error_by_default(tmp_path):
    mask = load_mask(write_mask(tmp_path, SWR_MASK))
    f = np.linspace(2.42e9, 2.6e9, 19)
    with pytest.raises(MaskError, match=r"segments\[0\] 'band': 2.4 GHz..2.5 GHz is not inside "
                                        r"the sweep 2.42 GHz..2.6 GHz"):
        mask.evaluate(swr_sweep(f, np.full(f.size, 1.2)))


def test_outside_sweep_clip_judges_the_overlap_and_skips_the_rest(tmp_path):
    path = write_mask(tmp_path, """\
        quantity: swr
        outside_sweep: clip
        segments:
          - {name: band, from: 2.40 GHz, to: 2.50 GHz, upper: {from: 3.0, to: 2.0}}
          - {name: far, from: 5 GHz, to: 6 GHz, upper: 2.0}
    """)
    f = np.linspace(2.45e9, 2.6e9, 16)
    result = load_mask(path).evaluate(swr_sweep(f, np.full(f.size, 2.4)))
    band, far = result.segments
    assert far.verdict == "skipped" and far.worst is None
    assert band.judged_from_hz == 2.45e9 and band.judged_to_hz == 2.50e9 and band.clipped
    # The slope still runs over the whole segment: 2.5 at 2.45 GHz, so 2.4 passes there.
    assert band.worst.freq_hz == pytest.approx(2.50e9) and band.verdict == "fail"
    d = band.to_dict()
    assert d["clipped"] is True and d["verdict"] == "fail"
    assert result.to_dict()["segments"][1]["verdict"] == "skipped"


def test_sweep_ends_rounded_in_a_file_still_cover_the_mask(tmp_path):
    mask = load_mask(write_mask(tmp_path, SWR_MASK))
    f = np.linspace(2.4e9 + 0.4, 2.5e9 - 0.4, 11)  # ends off by 0.4 Hz (rounding)
    assert mask.evaluate(swr_sweep(f, np.full(11, 1.2))).verdict == "pass"


@pytest.mark.parametrize("bad", [np.nan, np.inf, complex(np.nan, 0.0)])
def test_non_finite_data_is_an_error_never_a_pass(tmp_path, bad):
    mask = load_mask(write_mask(tmp_path, SWR_MASK))
    f = np.linspace(2.3e9, 2.6e9, 31)
    g = np.full(f.size, 0.1 + 0j)
    g[12] = bad
    with pytest.raises(MaskError, match=r"S11 is not a finite number at 2\.42 GHz"):
        mask.evaluate(Sweep(f, g))


def test_non_finite_data_outside_every_segment_is_not_judged(tmp_path):
    mask = load_mask(write_mask(tmp_path, SWR_MASK))
    f = np.linspace(2.3e9, 2.6e9, 31)
    g = np.full(f.size, 0.1 + 0j)
    g[0] = np.nan  # 2.30 GHz: outside the segment and its edge neighbours
    assert mask.evaluate(Sweep(f, g)).verdict == "pass"


def test_swr_of_an_active_reflection_is_an_error(tmp_path):
    mask = load_mask(write_mask(tmp_path, SWR_MASK))
    f = np.linspace(2.3e9, 2.6e9, 31)
    g = np.full(f.size, 0.1 + 0j)
    g[15] = 1.02
    with pytest.raises(MaskError, match=r"\|S11\| = 1.02 >= 1: no SWR"):
        mask.evaluate(Sweep(f, g))


def test_return_loss_mask_judges_negative_return_loss_as_fail(tmp_path):
    mask = load_mask(find_config("masks", "whip-915"))
    f = np.linspace(880e6, 950e6, 71)
    g = np.full(f.size, 0.1 + 0j)
    g[30] = 1.05  # return loss -0.42 dB: exists, fails
    seg = mask.evaluate(Sweep(f, g)).segments[0]
    assert seg.verdict == "fail" and seg.worst.value == pytest.approx(-0.4238, abs=1e-4)


def test_mask_needing_s21_on_a_one_port_is_an_error():
    mask = load_mask(find_config("masks", "cable-6g"))
    f = np.linspace(10e6, 6e9, 101)
    with pytest.raises(MaskError, match="needs S21 but the sweep has 1 port"):
        mask.evaluate(Sweep(f, np.full(f.size, 0.01 + 0j)))


def test_shipped_cable_mask_on_a_synthetic_lossy_line():
    # Matched line with loss rising as sqrt(f) (skin effect, Pozar ch. 2): 2 dB at 6 GHz.
    f = np.linspace(10e6, 6e9, 401)
    loss_db = 2.0 * np.sqrt(f / 6e9)
    s21 = 10 ** (-loss_db / 20) * np.exp(-2j * np.pi * f * 2e-9)
    s = np.zeros((f.size, 2, 2), complex)
    s[:, 0, 0] = s[:, 1, 1] = 0.03 * np.exp(1j * f / 1e9)  # -30.5 dB match
    s[:, 1, 0] = s[:, 0, 1] = s21
    mask = load_mask(find_config("masks", "cable-6g"))
    assert mask.parameters == {"S11", "S21"}
    good = mask.evaluate(Sweep(f, s))
    assert good.verdict == "pass", [x.summary() for x in good.segments]
    # The straight limit -1 dB .. -3 dB stays below 2·sqrt(f/6 GHz) dB everywhere
    # (closest at 1.5 GHz, 0.5 dB margin); a 3.5 dB cable breaks it near 6 GHz.
    ins = good.segments[0]
    lower = -1.0 - 2.0 * (ins.freq_hz - 10e6) / (6e9 - 10e6)
    assert np.min(ins.values - lower) == pytest.approx(0.5, abs=0.01)
    assert ins.worst.bound == "upper"  # 0.2 dB above a 0.08 dB loss at 10 MHz: 0.28 dB
    s_bad = s.copy()
    s_bad[:, 1, 0] = s21 * 10 ** (-1.5 * np.sqrt(f / 6e9) / 20)
    bad = mask.evaluate(Sweep(f, s_bad))
    assert bad.verdict == "fail"
    assert bad.segments[0].verdict == "fail" and bad.segments[1].verdict == "pass"


def test_phase_is_interpolated_without_jumping_across_the_wrap(tmp_path):
    path = write_mask(tmp_path, """\
        parameter: S21
        quantity: phase
        segments:
          - {from: 1.05 GHz, to: 1.05 GHz, lower: 170 deg}
    """)
    # Phase 179° at 1.0 GHz and -179° (= 181°) at 1.1 GHz: midway it is ±180°, not 0°.
    f = np.array([1.0e9, 1.1e9])
    s = np.zeros((2, 2, 2), complex)
    s[:, 1, 0] = np.exp(1j * np.radians([179.0, -179.0]))
    sweep = Sweep(f, s)
    seg = load_mask(path).evaluate(sweep).segments[0]
    assert abs(seg.values[0]) == pytest.approx(180.0, abs=1e-9)


def test_group_delay_mask_on_a_delay_line(tmp_path):
    # A line of delay τ has τ_g = τ for S21 (group delay −dφ/dω).
    path = write_mask(tmp_path, """\
        parameter: S21
        quantity: group_delay
        aperture: 5
        segments:
          - {from: 1 GHz, to: 3 GHz, lower: 0.99 ns, upper: 1.01 ns}
    """)
    f = np.linspace(0.9e9, 3.1e9, 221)
    s = np.zeros((f.size, 2, 2), complex)
    s[:, 1, 0] = np.exp(-2j * np.pi * f * 1e-9)
    seg = load_mask(path).evaluate(Sweep(f, s)).segments[0]
    assert seg.verdict == "pass" and np.allclose(seg.values, 1e-9, rtol=1e-9)


def test_resistance_and_reactance_limits(tmp_path):
    path = write_mask(tmp_path, """\
        segments:
          - {quantity: resistance, from: 1 GHz, to: 2 GHz, lower: 40 ohm, upper: 60 ohm}
          - {quantity: reactance, from: 1 GHz, to: 2 GHz, lower: -10 ohm, upper: 10 ohm}
    """)
    f = np.linspace(1e9, 2e9, 5)
    z = np.array([50, 55 + 5j, 61, 45 - 11j, 50], complex)
    res = load_mask(path).evaluate(Sweep(f, (z - 50) / (z + 50)))
    r, x = res.segments
    assert r.verdict == "fail" and r.worst.value == pytest.approx(61.0)
    assert x.verdict == "fail" and x.worst.value == pytest.approx(-11.0)
    assert x.worst.bound == "lower"


def test_json_form_has_worst_margin_frequency_and_value(tmp_path):
    mask = load_mask(write_mask(tmp_path, SWR_MASK))
    f = np.linspace(2.40e9, 2.50e9, 11)
    d = mask.evaluate(swr_sweep(f, [1.5] * 5 + [2.5, 2.6] + [1.5] * 4)).to_dict()
    seg = d["segments"][0]
    assert seg["verdict"] == "fail"
    assert seg["worst"] == {"freq_hz": pytest.approx(2.46e9), "value": pytest.approx(2.6),
                            "limit": 2.0, "bound": "upper", "margin": pytest.approx(-0.6)}
    assert seg["failing_ranges_hz"] == [[pytest.approx(2.45e9), pytest.approx(2.46e9)]]
    assert seg["positions_failed"] == 2 and seg["unit"] == ""
    assert d["mask"]["name"] == "m"


# -- malformed files: one clear line naming file and key path -------------------------

MALFORMED = [
    ("segments: []", r"segments: must hold at least 1 entry"),
    ("quantity: swr\nsegment: []", r"unknown key 'segment' \(did you mean 'segments'\?\)"),
    ("name: x", r"segments: is required"),
    ("segments:\n  - {from: 1 GHz, to: 2 GHz, upper: 2}",
     r"segments\[0\].quantity: is required here or at the top"),
    ("quantity: vswr\nsegments: [{from: 1 GHz, to: 2 GHz, upper: 2}]",
     r"quantity: must be one of swr, return_loss"),
    ("quantity: swr\nsegments: [{from: 1 GHz, to: 2 GHz}]",
     r"segments\[0\]: needs an upper or a lower limit"),
    ("quantity: swr\nsegments: [{from: 2 GHz, to: 1 GHz, upper: 2}]",
     r"segments\[0\].to: must not lie below from \(2 GHz\)"),
    ("quantity: swr\nsegments: [{from: 1 GHz, to: 2 GHz, upper: 0.5}]",
     r"segments\[0\].upper: must be at least 1, got 0.5"),
    ("quantity: return_loss\nsegments: [{from: 1 GHz, to: 2 GHz, lower: 10 dBm}]",
     r"segments\[0\].lower: unknown decibel unit 'dBm'"),
    ("quantity: swr\nsegments: [{from: 1 Gz, to: 2 GHz, upper: 2}]",
     r"segments\[0\].from: unknown frequency unit 'Gz'"),
    ("quantity: swr\nparameter: S21\nsegments: [{from: 1 GHz, to: 2 GHz, upper: 2}]",
     r"segments\[0\].quantity: swr needs a reflection parameter \(S11, S22, ...\), got S21"),
    ("quantity: swr\nsegments: [{from: 1 GHz, to: 2 GHz, upper: 2, parameter: X11}]",
     r"segments\[0\].parameter: must be an S-parameter name such as S11 or S21, got 'X11'"),
    ("quantity: magnitude_db\nsegments: [{from: 1 GHz, to: 2 GHz, upper: -10, lower: -5}]",
     r"segments\[0\].lower: lies above the upper limit"),
    ("quantity: swr\nsegments: [{from: 1 GHz, to: 1 GHz, upper: {from: 2, to: 3}}]",
     r"segments\[0\].upper: a sloped limit needs a segment with from < to"),
    ("quantity: swr\nsegments: [{from: 1 GHz, to: 2 GHz, upper: {start: 2, to: 3}}]",
     r"segments\[0\].upper: unknown key 'start'"),
    ("quantity: swr\noutside_sweep: ignore\nsegments: [{from: 1 GHz, to: 2 GHz, upper: 2}]",
     r"outside_sweep: must be one of error, clip, got 'ignore'"),
    ("quantity: group_delay\naperture: 4\nsegments: [{from: 1 GHz, to: 2 GHz, upper: 1 ns}]",
     r"aperture: must be an odd number of points, got 4"),
    ("- just a list", r"must be a mapping of keys"),
    ("segments: [ {from: 1 GHz", r"line \d+, column \d+: YAML syntax error"),
]


@pytest.mark.parametrize(("text", "message"), MALFORMED)
def test_malformed_mask_files_name_file_and_key(tmp_path, text, message):
    path = write_mask(tmp_path, text + "\n", "broken.yaml")
    with pytest.raises(MaskError) as info:
        load_mask(path)
    text_out = str(info.value)
    assert text_out.startswith(f"mask {path}: "), text_out
    assert "\n" not in text_out
    assert re.search(message, text_out), text_out


def test_missing_mask_file_is_a_clear_error(tmp_path):
    with pytest.raises(MaskError, match=r"mask .*nope.yaml: file not found"):
        load_mask(tmp_path / "nope.yaml")
