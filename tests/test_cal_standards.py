"""Standard models and cal kit files.

Oracles: the closed-form check values of the offset-line standard model (line equations
from Pozar, Microwave Engineering, 4th ed., ch. 2; model as in the scikit-rf example
"SOLT Calibration Standards Creation") and a scikit-rf media cascade (tests only).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import skrf as rf
from skrf.media import DefinedGammaZ0

from acquire.calibration import Offset, Standard, load_kit
from acquire.calibration.standards import offset_line, termination_gamma
from acquire.errors import CalError, ConfigError
from acquire.library import CONFIG_ROOT

F = np.array([1e9, 10e9])


def _deg(x: np.ndarray) -> np.ndarray:
    return np.angle(x, deg=True)


def test_open_30ps_50ff_check_values() -> None:
    """Open, τ = 30 ps, C0 = 50 fF, lossless, Z_r = Z_off = 50 Ω: ∠Γ_T and ∠Γ."""
    std = Standard("open", "open", Offset(30e-12, 0, 50), capacitance_f=(50e-15, 0, 0, 0))
    assert np.allclose(_deg(termination_gamma(std, F, 50)), [-1.800, -17.854], atol=5e-4)
    assert np.allclose(_deg(std.reflection(F, 50)), [-23.400, 126.146], atol=5e-4)


def test_short_30ps_5ph_check_values() -> None:
    std = Standard("short", "short", Offset(30e-12, 0, 50), inductance_h=(5e-12, 0, 0, 0))
    assert np.allclose(_deg(std.reflection(F, 50)), [158.328, -36.720], atol=5e-4)


def test_offset_loss_check_values() -> None:
    """L_off = 1 GΩ/s, τ = 30 ps: αl = 3.0e-4 Np at 1 GHz, 6.0e-4 Np at 4 GHz."""
    gl, _ = offset_line(np.array([1e9, 4e9]), Offset(30e-12, 1e9, 50))
    assert np.allclose(gl.real, [3.0e-4, 6.0e-4], rtol=1e-12)
    assert np.allclose(np.exp(-2 * gl.real), [0.99940, 0.99880], atol=5e-6)


def test_load_behind_a_49_ohm_line() -> None:
    """50 Ω load behind 20 ps of lossless 49 Ω line: max |Γ| = 0.02020 (quarter wave at
    12.5 GHz: 2|Γ1|/(1 + Γ1²), Γ1 = −1/99)."""
    std = Standard("load", "load", Offset(20e-12, 0, 49), impedance_ohm=50)
    f = np.linspace(0.1e9, 20e9, 200)
    assert np.abs(std.reflection(np.append(f, 12.5e9), 50)).max() == pytest.approx(0.02020,
                                                                                    abs=5e-6)


def test_flush_and_lossless_limits() -> None:
    f = np.linspace(1e8, 20e9, 50)
    assert np.allclose(Standard("o", "open").reflection(f, 50), 1.0)
    assert np.allclose(Standard("s", "short").reflection(f, 50), -1.0)
    assert np.allclose(Standard("l", "load", impedance_ohm=50).reflection(f, 50), 0.0)
    # lossless with Z_off = Z_r: Γ = Γ_T·e^{−j2ωτ}
    std = Standard("s", "short", Offset(40e-12, 0, 50), inductance_h=(3e-12, 0, 0, 0))
    expected = termination_gamma(std, f, 50) * np.exp(-2j * 2 * np.pi * f * 40e-12)
    assert np.abs(std.reflection(f, 50) - expected).max() < 1e-13


def _skrf_cascade(std: Standard, freq: rf.Frequency, z_ref: float) -> np.ndarray:
    f = freq.f
    ideal = DefinedGammaZ0(frequency=freq, z0=z_ref)
    polyval = np.polynomial.polynomial.polyval
    if std.kind == "open":
        term = ideal.shunt_capacitor(polyval(f, std.capacitance_f)) ** ideal.open()
    elif std.kind == "short":
        term = ideal.inductor(polyval(f, std.inductance_h)) ** ideal.short()
    else:
        term = ideal.load((std.impedance_ohm - z_ref) / (std.impedance_ohm + z_ref))
    if std.offset.delay_s == 0:
        return term.s[:, 0, 0]
    gl, zc = offset_line(f, std.offset)
    line = DefinedGammaZ0(frequency=freq, z0=zc, gamma=gl, z0_port=z_ref).line(1, "m")
    return (line ** term).s[:, 0, 0]


@pytest.mark.parametrize("name", ["open", "short", "load"])
def test_shipped_kit_matches_scikit_rf_cascade(name: str) -> None:
    """Γ/Γ1 closed form vs scikit-rf DefinedGammaZ0 line ** termination (≤ 4e-13 expected)."""
    kit = load_kit("generic-sma-50")
    freq = rf.Frequency(0.01, 18, 301, unit="GHz")
    theirs = _skrf_cascade(kit.standard(name), freq, kit.z0_ohm)
    assert np.abs(kit.reflection(name, freq.f) - theirs).max() < 1e-12


def test_lossy_mismatched_offsets_match_scikit_rf() -> None:
    freq = rf.Frequency(0.01, 20, 201, unit="GHz")
    cases = [
        Standard("l", "load", Offset(35e-12, 2.2e9, 48.0), impedance_ohm=52 + 3j),
        Standard("o", "open", Offset(25e-12, 1.5e9, 51.0), capacitance_f=(40e-15, 1e-27, 0, 0)),
        Standard("s", "short", Offset(60e-12, 3e9, 49.5), inductance_h=(8e-12, 0, 2e-33, 0)),
    ]
    for std in cases:
        assert np.abs(std.reflection(freq.f, 50) - _skrf_cascade(std, freq, 50)).max() < 1e-12


def test_thru_line_matches_scikit_rf() -> None:
    freq = rf.Frequency(0.01, 20, 101, unit="GHz")
    std = Standard("t", "thru", Offset(90e-12, 2e9, 49.0))
    gl, zc = offset_line(freq.f, std.offset)
    line = DefinedGammaZ0(frequency=freq, z0=zc, gamma=gl, z0_port=50).line(1, "m")
    s11, s21 = std.thru_s(freq.f, 50)
    assert np.abs(s11 - line.s[:, 0, 0]).max() < 1e-12
    assert np.abs(s21 - line.s[:, 1, 0]).max() < 1e-12


# -- kit files ---------------------------------------------------------------------------


def test_shipped_kits_load_by_bare_name() -> None:
    kit = load_kit("generic-sma-50")
    assert kit.name == "generic-sma-50" and kit.z0_ohm == 50.0 and kit.max_hz == 18e9
    open_ = kit.standard("open")
    assert open_.offset.delay_s == pytest.approx(29e-12)
    assert open_.offset.loss_ohm_per_s == pytest.approx(1.1e9)
    assert open_.capacitance_f == pytest.approx((49.4e-15, -310e-27, 23.2e-36, -0.16e-45))
    assert kit.standard("short").inductance_h == pytest.approx((2.1e-12, -140e-24, 9.5e-33,
                                                                -0.08e-42))
    assert len(kit.sha256) == 64
    ideal = load_kit("ideal")
    f = np.linspace(1e9, 2e9, 3)
    assert np.allclose(ideal.reflection("open", f), 1) and np.allclose(ideal.reflection("load", f),
                                                                        0)
    for path in (CONFIG_ROOT / "calkits").glob("*.yaml"):
        load_kit(path)


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "kit.yaml"
    path.write_text(text, encoding="utf-8")
    return path


GOOD = """\
kit: bench-kit
z0: 50 ohm
frequency: {min: 0 Hz, max: 6 GHz}
standards:
  open: {offset: {delay: 10 ps}, capacitance: {c0: 20}}
  short: {}
  load:
  offset-short: {type: short, offset: {delay: 50 ps}}
  check-25: {type: load, impedance: {r: 25 ohm}}
"""


def test_extra_standards_with_a_type(tmp_path: Path) -> None:
    kit = load_kit(_write(tmp_path, GOOD))
    f = np.array([1e9])
    assert kit.names_of_kind("short") == ["short", "offset-short"]
    assert np.allclose(kit.reflection("check-25", f), -1 / 3)  # 25 Ω: Γ = −1/3
    assert np.allclose(kit.reflection("offset-short", f), -np.exp(-2j * 2 * np.pi * 1e9 * 50e-12))


@pytest.mark.parametrize(("text", "message"), [
    (GOOD.replace("z0: 50 ohm", "z0: 50 parsec"), r"kit.yaml: z0: unknown impedance unit"),
    (GOOD.replace("max: 6 GHz", "max: 0 Hz"), r"frequency.max: must be above frequency.min"),
    (GOOD.replace("{delay: 10 ps}", "{delai: 10 ps}"),
     r"standards.open.offset: unknown key 'delai' \(did you mean 'delay'\?\)"),
    (GOOD.replace("{c0: 20}", "{c0: twenty}"),
     r"standards.open.capacitance.c0: must be a number, got 'twenty'"),
    (GOOD.replace("short: {}", "short: {capacitance: {c0: 1}}"),
     r"standards.short.capacitance: only an open standard has 'capacitance'; this one is a short"),
    (GOOD.replace("{type: short, ", "{"), r"standards.offset-short.type: is required"),
    (GOOD.replace("type: load", "type: sliding"),
     r"standards.check-25.type: must be one of open, short, load, thru"),
    (GOOD.replace("{delay: 10 ps}", "{delay: -10 ps}"), r"standards.open.offset.delay: must be at"),
    ("kit: x\nfrequency: {min: 0 Hz, max: 1 GHz}\n", r"kit.yaml: standards: is required"),
    ("kit: [unclosed\n", r"kit.yaml: line 2, column 1: YAML syntax error"),
])
def test_kit_errors_name_file_and_key(tmp_path: Path, text: str, message: str) -> None:
    with pytest.raises(ConfigError, match=message) as info:
        load_kit(_write(tmp_path, text))
    assert "\n" not in str(info.value) and str(info.value).startswith("cal kit ")


def test_unknown_kit_name_lists_shipped_ones() -> None:
    with pytest.raises(ConfigError, match=r"no calkit named 'nope' \(shipped: .*generic-sma-50"):
        load_kit("nope")


def test_kit_range_and_missing_standard_are_cal_errors(tmp_path: Path) -> None:
    kit = load_kit(_write(tmp_path, GOOD))
    with pytest.raises(CalError, match=r"specified from 0 Hz to 6 GHz; the sweep covers 1 GHz to "
                                       r"7 GHz"):
        kit.reflection("open", np.array([1e9, 7e9]))
    with pytest.raises(CalError, match=r"no standard 'thru' \(has: open, short, load"):
        kit.thru_s("thru", np.array([1e9]))
