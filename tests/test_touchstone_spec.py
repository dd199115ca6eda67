"""The reader against hand-written reference files, one or more per edge case.

Each test names the rule it checks from the Touchstone File Format Specification 2.0
(IBIS Open Forum, 2009; "TS2.0") or 2.1 ("TS2.1"). Expected values are written out
by hand here, not computed by the code under test.
"""

from __future__ import annotations

import gzip
from pathlib import Path

import numpy as np
import pytest

from acquire.errors import TouchstoneError
from acquire.touchstone import parse_touchstone, read_touchstone

DATA = Path(__file__).parent / "data" / "touchstone"


def read(name: str, **kw):
    return read_touchstone(DATA / name, **kw)


def pattern(ports: int, point: int) -> np.ndarray:
    """S_ij = (1 - 2k)(10i + j)/100 + j(10i + j)/1000 (1-based i, j; point k)."""
    i, j = np.meshgrid(np.arange(1, ports + 1), np.arange(1, ports + 1), indexing="ij")
    return (1 - 2 * point) * (10 * i + j) / 100 + 1j * (10 * i + j) / 1000


def test_c01_ri_ma_db_hold_identical_values():
    # TS2.0 option line: RI real/imag, MA magnitude/angle, DB 20*log10|x|/angle, degrees
    expected = np.array([0.3 + 0.4j, -0.5, -0.25j])
    for name in ("c01_ri.s1p", "c01_ma.s1p", "c01_db.s1p"):
        f = read(name)
        assert f.fmt == name[4:6].upper()
        np.testing.assert_allclose(f.freq_hz, [915e6, 2450e6, 5800e6], rtol=0, atol=0)
        np.testing.assert_allclose(f.data[:, 0, 0], expected, rtol=1e-14, atol=1e-16)


def test_c01_angles_at_quarter_turns_are_exact():
    # 180 and -90 degrees give exactly -0.5 and -0.25j (no 1e-17 residue from cos/sin)
    f = read("c01_ma.s1p")
    assert f.data[1, 0, 0] == -0.5
    assert f.data[2, 0, 0] == -0.25j


def test_c02_bare_option_line_defaults_to_ghz_s_ma_50():
    # TS2.0: omitted option-line fields default to GHz, S, MA, R 50
    f = read("c02_bare_option.s1p")
    assert (f.parameter, f.fmt, f.z0) == ("S", "MA", (50.0,))
    np.testing.assert_array_equal(f.freq_hz, [1e9, 2e9])
    np.testing.assert_allclose(f.data[:, 0, 0], [0.5j, -0.25], atol=1e-16)
    assert f.warnings == ()


def test_c03_missing_option_line_lenient_defaults_with_warning():
    # TS2.0: every file has an option line; lenient readers fall back to the defaults
    f = read("c03_no_option.s1p")
    np.testing.assert_array_equal(f.freq_hz, [1.5e9, 2.5e9])
    np.testing.assert_allclose(f.data[:, 0, 0], [0.1, 0.2 * np.exp(1j * np.pi / 4)], rtol=1e-15)
    assert len(f.warnings) == 1 and "no option line" in f.warnings[0]


def test_c03_missing_option_line_strict_is_an_error():
    with pytest.raises(TouchstoneError, match=r"c03_no_option.s1p: line 2: no option line"):
        read("c03_no_option.s1p", strict=True)


def test_c04_version1_two_port_order_is_11_21_12_22():
    # TS2.0 network data: the 2-port exception, N11 N21 N12 N22
    f = read("c04_order.s2p")
    s = f.data[0]
    assert s[0, 0] == pytest.approx(0.1)
    assert s[1, 0] == pytest.approx(-0.9j)                          # S21 0.9 at -90 deg
    assert s[0, 1] == pytest.approx(0.01 * np.exp(1j * np.pi / 4))  # S12 0.01 at 45 deg
    assert s[1, 1] == pytest.approx(-0.2)
    assert f.data[1, 1, 0] == pytest.approx(-0.8)                   # S21 0.8 at -180 deg


def test_c05_case_tabs_crlf_comments_blank_lines():
    # TS2.0: case-insensitive, whitespace separated, '!' comments anywhere
    f = read("c05_untidy.s2p")
    assert (f.parameter, f.fmt) == ("S", "RI")
    np.testing.assert_array_equal(f.freq_hz, [100e6, 200e6])
    np.testing.assert_array_equal(f.data[0], [[0.1 - 0.1j, 0.01 + 0.01j], [0.9, 0.2 - 0.2j]])
    np.testing.assert_array_equal(f.data[1], [[0.11 - 0.11j, 0.011 + 0.011j],
                                              [0.89 - 0.01j, 0.21 - 0.21j]])
    assert "first point" in f.comments and "a comment row between data sets" in f.comments
    assert f.warnings == ()


def test_c06_only_the_first_option_line_counts():
    # TS2.0: additional option lines are ignored
    f = read("c06_two_options.s2p")
    assert (f.parameter, f.fmt, f.z0) == ("S", "RI", (50.0, 50.0))
    np.testing.assert_array_equal(f.freq_hz, [1e9, 2e9])
    assert f.data[1, 1, 0] == 0.2 + 0.2j
    assert "second option line ignored" in f.warnings[0]
    with pytest.raises(TouchstoneError, match="line 3: second option line ignored"):
        read("c06_two_options.s2p", strict=True)


def test_c07_noise_v1_after_network_data_and_v2_noise_block_agree():
    # TS2.0 noise parameters: 1.x block starts where the frequency drops; Rn/R in 1.x,
    # ohms in 2.x; Gamma_opt is magnitude/angle whatever the format
    v1, v2 = read("c07_noise_v1.s2p"), read("c07_noise_v2.ts")
    np.testing.assert_array_equal(v1.freq_hz, [1e9, 2e9, 3e9])
    np.testing.assert_allclose(v1.data, v2.data, rtol=1e-15)
    assert v1.data[0, 1, 0] == pytest.approx(4.0 * np.exp(1j * np.deg2rad(150)))
    for f in (v1, v2):
        assert f.noise is not None
        np.testing.assert_array_equal(f.noise.freq_hz, [1e9, 2e9])
        np.testing.assert_array_equal(f.noise.nfmin_db, [0.8, 1.0])
        np.testing.assert_allclose(f.noise.gamma_opt,
                                   [0.6 * np.exp(1j * np.pi / 6), 0.55 * np.exp(1j * np.pi / 3)])
        np.testing.assert_allclose(f.noise.rn_ohm, [20.0, 18.0], rtol=1e-15)


@pytest.mark.parametrize("ports", [3, 4])
def test_c08_three_and_four_ports_one_row_per_line(ports):
    # TS2.0: 3 and 4 ports are written row-major, one matrix row per line
    f = read(f"c08_{'three' if ports == 3 else 'four'}_port.s{ports}p")
    for k in range(2):
        np.testing.assert_allclose(f.data[k], pattern(ports, k), rtol=1e-15)


@pytest.mark.parametrize("ports", [5, 6])
def test_c09_five_and_six_ports_wrap_at_four_pairs(ports):
    # TS2.0: at most four pairs per line; each matrix row starts on a new line
    f = read(f"c09_{'five' if ports == 5 else 'six'}_port.s{ports}p")
    assert f.data.shape == (2, ports, ports)
    for k in range(2):
        np.testing.assert_allclose(f.data[k], pattern(ports, k), rtol=1e-15)


def test_c10_data_sets_split_at_pair_boundaries():
    # TS2.0: pairs never split, so odd counts start a set and even counts continue one
    f = read("c10_split_sets.s2p")
    np.testing.assert_array_equal(f.freq_hz, [1e9, 2e9, 3e9])
    # order 11 21 12 22: the four pairs read 0.1, 0.2, 0.3, 0.4 for point one
    np.testing.assert_allclose(f.data[0], [[0.1 + 0.01j, 0.3 + 0.03j], [0.2 + 0.02j, 0.4 + 0.04j]])
    np.testing.assert_allclose(f.data[1], [[0.5 + 0.05j, 0.7 + 0.07j], [0.6 + 0.06j, 0.8 + 0.08j]])
    np.testing.assert_allclose(f.data[2], [[0.9 + 0.09j, 1.1 + 0.11j], [1.0 + 0.1j, 1.2 + 0.12j]])


def test_c11_repeated_frequency_fails_naming_the_line():
    # TS2.0: frequencies increase (strictly: a repeat is refused)
    with pytest.raises(TouchstoneError, match=r"c11_duplicate_freq.s1p: line 5: frequency "
                                              r"2000000000 Hz is not above"):
        read("c11_duplicate_freq.s1p")


def test_c11_decreasing_frequency_in_three_port_fails():
    with pytest.raises(TouchstoneError, match=r"c11_decreasing_freq.s3p: line 6: frequency "
                                              r"500000000 Hz is not above"):
        read("c11_decreasing_freq.s3p")


def test_c12_short_last_set_fails_instead_of_truncating():
    # TS2.0: each data set holds 1 + 2 N^2 numbers
    with pytest.raises(TouchstoneError, match=r"c12_short_last_set.s2p: line 5: expected 9 "
                                              r"numbers per data set, found 8"):
        read("c12_short_last_set.s2p")


def test_c13_z_normalised_in_v1_absolute_in_v2():
    # TS2.0 option line: 1.x Z is Z/R (0.99 with R 75), 2.x Z in ohms (74.25)
    v1, v2 = read("c13_z_v1.s1p"), read("c13_z_v2.ts")
    assert v1.parameter == v2.parameter == "Z"
    np.testing.assert_allclose(v1.data[:, 0, 0], [74.25, 37.5j], rtol=1e-15)
    np.testing.assert_allclose(v2.data[:, 0, 0], [74.25, 37.5j], rtol=1e-15)
    # Gamma = (Z - R)/(Z + R), Pozar, Microwave Engineering, 4th ed., ch. 2
    gamma = v1.to_sweep().s[:, 0, 0]
    np.testing.assert_allclose(gamma, [(74.25 - 75) / (74.25 + 75), (37.5j - 75) / (37.5j + 75)],
                               rtol=0, atol=1e-15)


def test_c14_two_port_data_order_12_21_and_21_12_give_one_matrix():
    # TS2.0 [Two-Port Data Order]: 12_21 = 11 12 21 22, 21_12 = 11 21 12 22
    a, b = read("c14_order_12_21.ts"), read("c14_order_21_12.ts")
    np.testing.assert_array_equal(a.data, b.data)
    assert a.data[0, 0, 1] == 0.12 + 0.012j and a.data[0, 1, 0] == 0.21 + 0.021j


def test_c15_full_lower_upper_give_one_symmetric_matrix_and_split_reference():
    # TS2.0 [Matrix Format] Lower: row i has columns 1..i; Upper: i..N; [Reference] may
    # continue on following lines
    files = [read(f"c15_four_port_{m}.ts") for m in ("full", "lower", "upper")]
    i, j = np.meshgrid(np.arange(1, 5), np.arange(1, 5), indexing="ij")
    lo, hi = np.minimum(i, j), np.maximum(i, j)
    expected = (10 * lo + hi) / 100 - 1j * (10 * lo + hi) / 1000
    for f in files:
        assert f.z0 == (50.0, 75.0, 25.5, 100.0)
        np.testing.assert_allclose(f.data[0], expected, rtol=1e-15)
        np.testing.assert_array_equal(f.freq_hz, [2.45e9])


def test_c16_missing_end_fails():
    # TS2.1 (TSIRD 4.1): [End] is required
    with pytest.raises(TouchstoneError, match=r"c16_missing_end.ts: missing \[End\]"):
        read("c16_missing_end.ts")


def test_c16_missing_two_port_data_order_fails():
    # TS2.0: [Two-Port Data Order] is required for 2-port files
    with pytest.raises(TouchstoneError, match=r"line 6: a 2-port version 2 file needs "
                                              r"\[Two-Port Data Order\]"):
        read("c16_missing_order.ts")


def test_c16_wrong_number_of_frequencies_fails():
    # TS2.0: [Number of Frequencies] must match the data sets present
    with pytest.raises(TouchstoneError, match=r"line 6: \[Number of Frequencies\] is 3 but "
                                              r"\[Network Data\] holds 2 data sets"):
        read("c16_wrong_count.ts")


def test_c17_version_1_1_per_port_reference_resistances():
    # TS2.1: version 1.1 lists one resistance per port after R
    f = read("c17_per_port_r.s2p")
    assert f.version == "1.1" and f.z0 == (50.0, 75.0)
    assert f.to_sweep().z0 == (50.0, 75.0)


def test_c18_information_block_skipped_and_mixed_mode_parsed_but_not_a_sweep():
    # TS2.1: [Begin Information]..[End Information] may be skipped; [Mixed-Mode Order]
    # labels rows/columns as D, C or S
    f = read("c18_info_mixed.ts")
    assert f.version == "2.1" and f.ports == 4
    assert f.mixed_mode == ("D1,2", "D3,4", "C1,2", "C3,4")
    assert f.data[0, 1, 0] == 0.2 and f.data[0, 3, 3] == 0.1
    with pytest.raises(TouchstoneError, match="mixed-mode data"):
        f.to_sweep()


def test_c19_number_forms_and_high_byte_in_comment():
    # TS2.0: numbers like .95, +5, 1E9, -0; bytes above 0x7E are illegal (warned in a comment)
    f = read("c19_number_forms.s1p")
    np.testing.assert_array_equal(f.freq_hz, [1e9, 2e9, 3e9])
    np.testing.assert_array_equal(f.data[:, 0, 0], [0.95, 5 - 0.5j, 5])
    assert np.signbit(f.data[0, 0, 0].imag)                     # "-0" keeps its sign
    assert any("byte 0xb5" in w for w in f.warnings)
    with pytest.raises(TouchstoneError, match=r"line 1: byte 0xb5 in a comment"):
        read("c19_number_forms.s1p", strict=True)


def test_c20_large_sweep_with_1hz_steps_near_10ghz():
    # 10 001 points, 1 Hz apart at 10 GHz: every step must survive (11 significant digits)
    text = gzip.decompress((DATA / "c20_large_1hz_steps.s1p.gz").read_bytes()).decode("ascii")
    f = parse_touchstone(text, name="c20.s1p", ports=1)
    k = np.arange(10001)
    np.testing.assert_array_equal(f.freq_hz, 9_999_995_000 + k)
    np.testing.assert_array_equal(np.diff(f.freq_hz), 1.0)
    expected = ((37 * k) % 2000 - 1000) / 1000 + 1j * (((91 * k) % 2000 - 1000) / 1000)
    np.testing.assert_array_equal(f.data[:, 0, 0], expected)
