"""Cal set files, lookup, validity rules and interpolation.

Validity rules (refuse grid, path/power and instrument changes; warn on IF bandwidth and
averaging) follow the usual practice that a calibration holds only for the settings it was
made with (EURAMET cg-12, v3.0, 2018, on VNA calibration validity; details common
practice). Interpolation: the midpoint of a linear complex interpolation across a phase
step Δφ shrinks by cos(Δφ/2) (10° → 0.38 %), so terms are interpolated after a fitted
delay is removed.
"""

from __future__ import annotations

import io
import json
import logging
import zipfile
from datetime import timedelta
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

from acquire.calibration import (
    CalSet,
    OnePortTerms,
    ValidityPolicy,
    check_validity,
    find_latest,
    load_kit,
    prepare,
    select,
    solve,
)
from acquire.calibration.calset import read_header
from acquire.calibration.interpolate import interpolate_term
from acquire.errors import CalError
from acquire.sweep import Sweep
from drivers.stimulus import Stimulus

KIT = load_kit("generic-sma-50")
IDN = "sweepd-sim,generic-2port,SIM0001,1.0"
STIM = Stimulus(2.3e9, 2.6e9, 301, -10.0, 1e3)


def _box(f: np.ndarray) -> OnePortTerms:
    """Error terms with several delays, so they are not a pure rotation."""
    w = 2 * np.pi * f
    return OnePortTerms(0.04 * np.exp(-1j * w * 0.4e-9) + 0.01 * np.exp(-1j * w * 2e-9),
                        0.12 * np.exp(1j - 1j * w * 0.7e-9) + 0.03 * np.exp(-1j * w * 3e-9),
                        0.7 * np.exp(-1j * w * 5e-9) * (1 + 0.05 * np.exp(-1j * w * 1.5e-9)))


def _calset(stim: Stimulus = STIM, plan: str = "patch-line-a", idn: str = IDN,
            created: str = "2026-12-02T06:10:00.000000Z") -> CalSet:
    f = stim.frequencies()
    box = _box(f)
    raw = {f"{k}.S11": box.embed(KIT.reflection(k, f)) for k in ("open", "short", "load")}
    sol = solve("one-port", f, raw, KIT)
    return CalSet(plan, sol.model, stim, idn, KIT.name, KIT.sha256,
                  "end of the test cable, at the fixture's SMA jack", created_utc=created,
                  raw=raw, figures={**sol.figures, "balance_db": 1.25, "nan_is_null": np.inf},
                  temperature_c=23.5)


CAL = _calset()
T0 = CAL.created


def test_round_trip_is_bit_exact(tmp_path: Path) -> None:
    path = CAL.save(tmp_path)
    assert path.name == f"{CAL.id}.calset"
    assert CAL.id.startswith("20261202T061000Z-patch-line-a-")
    back = CalSet.load(path)
    assert back.to_bytes() == path.read_bytes() == CAL.to_bytes()
    assert back.id == CAL.id and back.plan == CAL.plan and back.stimulus == CAL.stimulus
    assert back.instrument == IDN and back.kit_sha256 == KIT.sha256
    assert back.temperature_c == 23.5 and back.figures["nan_is_null"] is None
    for name, arr in CAL.model.flat_terms().items():
        assert np.array_equal(back.model.flat_terms()[name], arr)
    for name, arr in CAL.raw.items():
        assert np.array_equal(back.raw[name], arr)
    assert np.array_equal(back.freq_hz, STIM.frequencies())
    header = read_header(path)
    assert header["format"] == "sweepd-calset" and header["version"] == 1
    assert header["terms"] == ["S11.directivity", "S11.reflection_tracking", "S11.source_match"]


def test_two_saves_never_overwrite(tmp_path: Path) -> None:
    first = CAL.save(tmp_path)
    second = CAL.save(tmp_path)
    other = _calset(created="2026-12-02T06:11:00.000000Z").save(tmp_path)
    assert len({first, second, other}) == 3
    assert second.name == f"{CAL.id}-2.calset"
    assert all(CalSet.load(p).id for p in (first, second, other))
    assert not list(tmp_path.glob(".tmp-*"))


def _rezip(data: bytes, edit) -> bytes:
    """Rewrite a cal set with a changed header (CRCs stay valid)."""
    src = zipfile.ZipFile(io.BytesIO(data))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w") as dst:
        for info in src.infolist():
            payload = src.read(info.filename)
            if info.filename == "header.json":
                header = json.loads(payload)
                edit(header)
                payload = json.dumps(header).encode()
            dst.writestr(info, payload)
    return out.getvalue()


def _bump_version(h: dict) -> None:
    h["version"] = 2


def _bad_points(h: dict) -> None:
    h["stimulus"]["points"] = "many"


def _tamper(h: dict) -> None:
    h["figures"]["balance_db"] = 0.5


def _other_format(h: dict) -> None:
    h["format"] = "something-else"


@pytest.mark.parametrize(("damage", "message"), [
    (lambda d: d[: len(d) // 2], r"not a readable cal set \(damaged or truncated file"),
    (lambda d: d[:-30], r"not a readable cal set"),
    (lambda d: b"", r"not a readable cal set \(damaged or truncated file, 0 bytes\)"),
    (lambda d: d[:2000] + bytes([d[2000] ^ 0xFF]) + d[2001:], r"is damaged|content check"),
    (lambda d: _rezip(d, _bump_version), r"format version 2 is newer than this sweepd reads "
                                         r"\(1\): upgrade sweepd"),
    (lambda d: _rezip(d, _bad_points), r"header key 'stimulus.points': expected int, got 'many'"),
    (lambda d: _rezip(d, _tamper), r"content check failed: the file was altered or damaged"),
    (lambda d: _rezip(d, _other_format), r"not a sweepd cal set \(format 'something-else'"),
])
def test_damaged_files_are_refused_in_one_line(tmp_path: Path, damage, message: str) -> None:
    path = tmp_path / "x.calset"
    path.write_bytes(damage(CAL.to_bytes()))
    with pytest.raises(CalError, match=message) as info:
        CalSet.load(path)
    assert "\n" not in str(info.value) and str(info.value).startswith(f"cal set {path}: ")


def test_find_latest_skips_other_plans_instruments_and_damaged_files(
        tmp_path: Path, caplog: pytest.LogCaptureFixture) -> None:
    old = _calset(created="2026-12-01T06:00:00.000000Z").save(tmp_path)
    new = _calset(created="2026-12-02T06:00:00.000000Z").save(tmp_path)
    _calset(created="2026-12-02T07:00:00.000000Z", plan="whip-915").save(tmp_path)
    _calset(created="2026-12-02T08:00:00.000000Z", idn="a,b,OTHER,1").save(tmp_path)
    broken = _calset(created="2026-12-02T09:00:00.000000Z").save(tmp_path)
    broken.write_bytes(broken.read_bytes()[:500])
    with caplog.at_level(logging.WARNING):
        found = find_latest(tmp_path, "patch-line-a", IDN)
    assert found is not None and found.id == CalSet.load(new).id
    assert "skipping cal set" in caplog.text and broken.name in caplog.text
    assert find_latest(tmp_path, "patch-line-a", "a,b,OTHER,1").instrument == "a,b,OTHER,1"
    assert find_latest(tmp_path, "no-such-plan") is None
    assert find_latest(tmp_path / "missing", "patch-line-a") is None
    assert old.exists()


def test_select_newest_usable_or_say_what_to_do(tmp_path: Path) -> None:
    _calset(created="2026-12-02T06:00:00.000000Z").save(tmp_path)
    now = T0 + timedelta(hours=1)
    cal, warnings = select(tmp_path, "patch-line-a", STIM, IDN, now=now)
    assert cal.when == "2026-12-02T06:00Z" and warnings == []
    with pytest.raises(CalError, match=r"^calibration 2026-12-02T06:00Z for plan patch-line-a is "
                                       r"10.2 h old \(max 8 h\): run `sweepd calibrate "
                                       r"lines/patch.yaml`$"):
        select(tmp_path, "patch-line-a", STIM, IDN, now=T0 + timedelta(hours=10),
               plan_ref="lines/patch.yaml")
    with pytest.raises(CalError, match=r"^no calibration for plan whip-915 on instrument "
                                       r"'sweepd-sim,generic-2port,SIM0001,1.0' in .*: run "
                                       r"`sweepd calibrate whip-915`$"):
        select(tmp_path, "whip-915", STIM, IDN, now=now)


def test_stale_cal_is_refused_with_the_reason() -> None:
    with pytest.raises(CalError) as info:
        check_validity(CAL, STIM, IDN, now=T0 + timedelta(hours=9.2))
    assert str(info.value) == ("calibration 2026-12-02T06:10Z for plan patch-line-a is 9.2 h old "
                               "(max 8 h): run `sweepd calibrate patch-line-a`")
    assert check_validity(CAL, STIM, IDN, now=T0 + timedelta(hours=7.9)) == []
    with pytest.raises(CalError, match=r"is dated 2 h in the future: check the system clock"):
        check_validity(CAL, STIM, IDN, now=T0 - timedelta(hours=2))


def test_grid_power_and_identity_mismatches_are_refused() -> None:
    now = T0 + timedelta(minutes=5)
    other_grid = Stimulus(2.3e9, 2.6e9, 601, -10.0, 1e3)
    with pytest.raises(CalError, match=r"was made on 2.3 GHz to 2.6 GHz, 301 points; this sweep is "
                                       r"2.3 GHz to 2.6 GHz, 601 points: run `sweepd calibrate "
                                       r"patch-line-a` \(or allow interpolation"):
        check_validity(CAL, other_grid, IDN, now=now)
    louder = Stimulus(2.3e9, 2.6e9, 301, 0.0, 1e3)
    with pytest.raises(CalError, match=r"was made with source power -10 dBm; this sweep uses "
                                       r"0 dBm \(the plan refuses a change\)"):
        check_validity(CAL, louder, IDN, now=now)
    (warning,) = check_validity(CAL, louder, IDN, now=now,
                                policy=ValidityPolicy(power_mismatch="warn"))
    assert warning.endswith("was made with source power -10 dBm; this sweep uses 0 dBm")
    with pytest.raises(CalError, match=r"was made on instrument 'sweepd-sim,generic-2port,SIM0001,"
                                       r"1.0', this one is 'sweepd-sim,generic-2port,SIM0009,1.0'"):
        check_validity(CAL, STIM, "sweepd-sim,generic-2port,SIM0009,1.0", now=now)
    assert check_validity(CAL, STIM, " SWEEPD-SIM, generic-2port,SIM0001,1.0", now=now) == []


def test_if_bandwidth_and_averaging_warn_by_default() -> None:
    now = T0 + timedelta(minutes=5)
    wider = Stimulus(2.3e9, 2.6e9, 301, -10.0, 10e3, averaging=4)
    warnings = check_validity(CAL, wider, IDN, now=now)
    assert warnings == [
        "calibration 2026-12-02T06:10Z for plan patch-line-a was made with IF bandwidth 1 kHz; "
        "this sweep uses 10 kHz (noise may differ)",
        "calibration 2026-12-02T06:10Z for plan patch-line-a was made with averaging off; "
        "this sweep uses 4 sweeps (noise may differ)",
    ]
    spec = SimpleNamespace(max_age_s=3600.0, power_mismatch="refuse",
                           if_bandwidth_mismatch="refuse", allow_interpolation=False, kit="x")
    policy = ValidityPolicy.from_spec(spec)
    assert policy.max_age_s == 3600.0 and policy.if_bandwidth_mismatch == "refuse"
    with pytest.raises(CalError, match="IF bandwidth 1 kHz; this sweep uses 10 kHz"):
        check_validity(CAL, wider, IDN, now=now, policy=policy)


def test_correct_sweep_records_cal_in_meta() -> None:
    f = STIM.frequencies()
    dut = 0.3 * np.exp(1j * 2 * np.pi * f * 0.2e-9)
    sweep = Sweep(f, _box(f).embed(dut), meta={"plan": "patch-line-a"})
    out = CAL.correct(sweep, now=T0 + timedelta(minutes=30))
    assert np.abs(out.param("S11") - dut).max() < 1e-12
    assert out.meta["cal_id"] == CAL.id and out.meta["cal_age_s"] == 1800.0
    assert out.meta["cal_interpolated"] is False and out.meta["plan"] == "patch-line-a"
    with pytest.raises(CalError, match="does not match the sweep"):
        CAL.correct(Sweep(f[:-1], sweep.s[:-1]))


def test_interpolated_cal_is_flagged_and_accurate() -> None:
    fine = Stimulus(2.3e9, 2.6e9, 1001, -10.0, 1e3)
    now = T0 + timedelta(minutes=5)
    with pytest.raises(CalError, match="or allow interpolation"):
        prepare(CAL, fine, IDN, now=now)
    policy = ValidityPolicy(allow_interpolation=True)
    cal, warnings = prepare(CAL, fine, IDN, now=now, policy=policy)
    assert cal.interpolated and cal.interpolation["from"] == CAL.id
    assert cal.interpolation["coarse"] is False and cal.created == CAL.created
    assert warnings == ["calibration 2026-12-02T06:10Z was interpolated from 2.3 GHz to 2.6 GHz, "
                        "301 points to 2.3 GHz to 2.6 GHz, 1001 points"]
    f = fine.frequencies()
    dut = 0.5 * np.exp(1j * 2 * np.pi * f * 0.3e-9)
    out = cal.correct(Sweep(f, _box(f).embed(dut)), now=now)
    assert out.meta["cal_interpolated"] is True and out.meta["cal_id"] == CAL.id
    assert np.abs(out.param("S11") - dut).max() < 2e-4
    again = CalSet.from_bytes(cal.to_bytes())  # an interpolated set round-trips too
    assert again.interpolation == cal.interpolation


def test_interpolation_never_extrapolates() -> None:
    wider = Stimulus(2.2e9, 2.6e9, 301, -10.0, 1e3)
    with pytest.raises(CalError, match=r"goes beyond the calibration \(2.3 GHz to 2.6 GHz\); a "
                                       r"calibration is never extrapolated: run `sweepd calibrate"):
        prepare(CAL, wider, IDN, now=T0, policy=ValidityPolicy(allow_interpolation=True))


def test_coarse_calibration_grid_is_flagged() -> None:
    sparse = Stimulus(1e9, 6e9, 41, -10.0, 1e3)  # 125 MHz steps: ripple terms turn > 10°/point
    cal = _calset(stim=sparse)
    target = Stimulus(1e9, 6e9, 401, -10.0, 1e3)
    result, warnings = prepare(cal, target, IDN, now=cal.created,
                               policy=ValidityPolicy(allow_interpolation=True))
    assert result.interpolation["coarse"] is True
    assert result.interpolation["max_step_deg"] > 10.0
    assert "the interpolated correction is coarse" in warnings[-1]


def test_delay_removal_beats_plain_complex_interpolation() -> None:
    """A term behind 5 ns with 10° steps per point: plain linear complex interpolation loses
    1 − cos(5°) = 0.38 % at midpoints; after removing the fitted delay it is exact."""
    step = 10.0 / (360 * 5e-9)  # 5.556 MHz per point for 10°
    f = 1e9 + step * np.arange(50)
    term = 0.7 * np.exp(-1j * 2 * np.pi * f * 5e-9)
    mid = (f[:-1] + f[1:]) / 2
    truth = 0.7 * np.exp(-1j * 2 * np.pi * mid * 5e-9)
    plain = np.interp(mid, f, term.real) + 1j * np.interp(mid, f, term.imag)
    assert np.abs(plain / truth).min() == pytest.approx(np.cos(np.radians(5)), abs=1e-9)
    ours, max_step = interpolate_term(f, term, mid)
    assert np.abs(ours - truth).max() < 1e-9 and max_step < 1e-6
