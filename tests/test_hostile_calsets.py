"""Hostile cal set files (issue 10.9): each is refused in one line before memory is
committed, and a valid cal set beside it is still found and used."""

from __future__ import annotations

import io
import json
import logging
import zipfile
from pathlib import Path

import numpy as np
import pytest

from acquire.calibration import CalSet, find_latest, load_kit, solve
from acquire.calibration.calset import read_header
from acquire.errors import CalError
from drivers.stimulus import Stimulus

KIT = load_kit("ideal")
IDN = "sweepd-sim,generic-2port,SIM0001,1.0"
STIM = Stimulus(2.3e9, 2.6e9, 51, -10.0, 1e3)


def make_calset(created: str = "2026-12-02T06:00:00.000000Z") -> CalSet:
    f = STIM.frequencies()
    raw = {f"{k}.S11": KIT.reflection(k, f) * 0.9 + 0.01 for k in ("open", "short", "load")}
    sol = solve("one-port", f, raw, KIT)
    return CalSet("patch-line-a", sol.model, STIM, IDN, KIT.name, KIT.sha256, "port 1",
                  created_utc=created, raw=raw, figures=dict(sol.figures))


GOOD = make_calset().to_bytes()


def rebuild(data: bytes, *, header=None, members=None, compress=None, extra=()) -> bytes:
    """A copy of a cal set image with the header text, some members or their compression
    changed (``header`` maps the header's JSON text to new text)."""
    src = zipfile.ZipFile(io.BytesIO(data))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w") as dst:
        for info in src.infolist():
            payload = src.read(info.filename)
            if info.filename == "header.json" and header is not None:
                payload = header(payload.decode()).encode()
            payload = (members or {}).get(info.filename, payload)
            method = zipfile.ZIP_STORED if compress != info.filename else zipfile.ZIP_DEFLATED
            dst.writestr(info.filename, payload, compress_type=method)
        for name, payload in extra:
            dst.writestr(name, payload)
    return out.getvalue()


def edit_header(change) -> callable:
    def edit(text: str) -> str:
        header = json.loads(text)
        change(header)
        return json.dumps(header)
    return edit


def raw_value(key: str, raw: str):
    """Set header key ``key`` to a raw JSON text (beyond what json.dumps would write)."""
    def edit(text: str) -> str:
        header = json.loads(text)
        header[key] = "@@RAW@@"
        return json.dumps(header).replace('"@@RAW@@"', raw)
    return edit


def npy_claiming(shape: tuple[int, ...], dtype=np.float64, data: bytes = b"\0" * 64) -> bytes:
    stream = io.BytesIO()
    np.lib.format.write_array_header_1_0(
        stream, {"shape": shape, "fortran_order": False, "descr": np.dtype(dtype).str})
    return stream.getvalue() + data


def inflating_member(size: int) -> bytes:
    """A ZIP image whose one member deflates from a few KB to ``size`` zero bytes."""
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as archive, \
            archive.open("header.json", "w") as member:
        chunk = b"\0" * (1 << 20)
        for _ in range(size >> 20):
            member.write(chunk)
    return out.getvalue()


HOSTILE = {
    "deep JSON": (rebuild(GOOD, header=raw_value("figures", "[" * 100_000 + "]" * 100_000)),
                  r"nested deeper than 16 levels"),
    "moderately deep JSON": (rebuild(GOOD, header=raw_value("figures", "[" * 500 + "]" * 500)),
                             r"nested deeper than 16 levels"),
    "huge integer": (rebuild(GOOD, header=raw_value("port", "9" * 400)),
                     r"not valid JSON \(an integer of 400 digits"),
    "integer beyond the digit limit": (rebuild(GOOD, header=raw_value("port", "9" * 5000)),
                                       r"an integer of 5000 digits"),
    "1e999": (rebuild(GOOD, header=raw_value("temperature_c", "1e999")),
              r"1e999 is beyond a finite number"),
    "NaN": (rebuild(GOOD, header=raw_value("temperature_c", "NaN")),
            r"NaN is not a finite number"),
    "-Infinity": (rebuild(GOOD, header=raw_value("temperature_c", "-Infinity")),
                  r"-Infinity is not a finite number"),
    "array claiming 10^12 points": (
        rebuild(GOOD, members={"freq_hz.npy": npy_claiming((10**12,))}),
        r"array 'freq_hz.npy' is float64\[1000000000000\], expected float64\[51\]"),
    "points and array claiming 10^12": (
        rebuild(GOOD, header=edit_header(lambda h: h["stimulus"].update(points=10**12)),
                members={"freq_hz.npy": npy_claiming((10**12,))}),
        r"array 'freq_hz.npy' is damaged \(64 data bytes for \[1000000000000\]\)"),
    "object array (pickle)": (
        rebuild(GOOD, members={"freq_hz.npy": npy_claiming((51,), object)}),
        r"array 'freq_hz.npy' is object"),
    "compressed member": (rebuild(GOOD, compress="freq_hz.npy"), r"member 'freq_hz.npy' is "
                                                                 r"compressed"),
    "inflating bomb": (inflating_member(64 << 20), r"member 'header.json' is compressed"),
    "too many members": (rebuild(GOOD, extra=[(f"pad/{i}", b"") for i in range(200)]),
                         r"20\d members, more than a cal set holds \(128\)"),
    "header of the wrong kind": (rebuild(GOOD, header=lambda t: "[1, 2]"),
                                 r"header.json must hold a JSON object"),
}


@pytest.mark.parametrize("case", list(HOSTILE))
def test_hostile_cal_set_is_refused_in_one_line(tmp_path: Path, case: str) -> None:
    data, message = HOSTILE[case]
    path = tmp_path / "x.calset"
    path.write_bytes(data)
    readers = (CalSet.load,) if "array" in message else (CalSet.load, read_header)
    for read in readers:  # read_header leaves the arrays unread
        with pytest.raises(CalError, match=message) as info:
            read(path)
        text = str(info.value)
        assert text.startswith(f"cal set {path}: ") and "\n" not in text and len(text) < 400


def test_a_file_beyond_the_size_limit_is_refused_unread(tmp_path: Path, monkeypatch) -> None:
    monkeypatch.setattr("acquire.calibration.calfile.MAX_FILE_BYTES", len(GOOD) - 1)
    path = tmp_path / "x.calset"
    path.write_bytes(GOOD)
    with pytest.raises(CalError, match=r"larger than 0 MiB; not a cal set"):
        CalSet.load(path)


@pytest.mark.parametrize("case", ["deep JSON", "huge integer", "array claiming 10^12 points",
                                  "points and array claiming 10^12", "inflating bomb", "NaN"])
def test_a_bad_cal_set_is_skipped_with_a_warning_and_a_good_one_used(
        tmp_path: Path, caplog: pytest.LogCaptureFixture, case: str) -> None:
    good = make_calset("2026-12-02T06:00:00.000000Z").save(tmp_path)
    bad = tmp_path / "20261202T090000Z-patch-line-a-zzzz.calset"  # newer by name and date
    bad.write_bytes(HOSTILE[case][0])
    with caplog.at_level(logging.WARNING):
        found = find_latest(tmp_path, "patch-line-a", IDN)
    assert found is not None and found.id == CalSet.load(good).id
    assert f"skipping cal set {bad}" in caplog.text


# -- unfinished calibration files (calibrate --resume) read with the same bounds ----------

def _partial_image(tmp_path: Path) -> bytes:
    from acquire.guided.partial import Fingerprint, Partial, partial_path

    fp = Fingerprint("patch", "one-port", IDN, STIM, KIT.name, KIT.sha256)
    partial = Partial(fp, freq_hz=STIM.frequencies())
    partial.readings["open"] = {"S11": np.ones(STIM.points, complex)}
    partial.status["open"] = "done"
    return partial.save(partial_path(tmp_path, "patch")).read_bytes()


@pytest.mark.parametrize(("change", "message"), [
    (lambda img: rebuild(img, header=raw_value("plan", "[" * 100_000 + "]" * 100_000)),
     r"nested deeper than 16 levels"),
    (lambda img: rebuild(img, members={"freq_hz.npy": npy_claiming((10**12,))}),
     r"array 'freq_hz.npy' is float64\[1000000000000\], expected float64\[51\]"),
    (lambda img: rebuild(img, members={"raw/open.S11.npy": npy_claiming((51,), np.complex128)}),
     r"array 'raw/open.S11.npy' is damaged \(64 data bytes for \[51\]\)"),
    (lambda img: rebuild(img, compress="freq_hz.npy"), r"member 'freq_hz.npy' is compressed"),
])
def test_hostile_unfinished_calibration_is_one_line(tmp_path: Path, change, message: str) -> None:
    from acquire.guided.partial import load_partial

    path = tmp_path / "x.partial-cal"
    path.write_bytes(change(_partial_image(tmp_path)))
    with pytest.raises(CalError, match=message) as info:
        load_partial(path)
    assert str(info.value).startswith(f"unfinished calibration {path}: ")
    assert "\n" not in str(info.value)
