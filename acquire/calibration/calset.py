"""Cal sets: solved error terms plus everything needed to judge when they apply.

File format ("sweepd cal set", version 1), one file per calibration, never overwritten,
named ``<id>.calset`` in the cal folder. The file is a ZIP archive (stored, no
compression, fixed member dates, so saving the same cal set twice gives the same bytes):

- ``header.json``: UTF-8 JSON object, keys sorted::

      format            "sweepd-calset"
      version           1 (a reader refuses versions newer than it knows)
      id                "<UTC yyyymmddThhmmssZ>-<plan>-<first 10 hex of content_sha256>"
      content_sha256    SHA-256 over the header (without id and content_sha256) and
                        every array (name, dtype, shape, bytes), in member order
      plan, method, port, instrument ("maker,model,serial,firmware"), reference_plane
      created_utc       "YYYY-MM-DDTHH:MM:SS.ffffffZ"
      stimulus          {start_hz, stop_hz, points, power_dbm, if_bandwidth_hz, averaging}
      kit               {name, sha256}   (SHA-256 of the kit file's bytes)
      temperature_c     number or null
      interpolation     null, or {from, max_step_deg, coarse, ...} for an interpolated set
      figures           plausibility and residual figures (JSON values)
      terms             names of the error-term arrays, e.g. "S11.directivity"
      raw               names of the raw standard readings, e.g. "open.S11"; a load's
                        second reading without reconnecting (trace noise) is
                        "<load>.<param>-again", e.g. "load.S11-again"

- ``freq_hz.npy`` (float64), ``terms/<name>.npy`` and ``raw/<name>.npy`` (complex128):
  NumPy ``.npy`` arrays (no pickles).
"""

from __future__ import annotations

import hashlib
import io
import json
import zipfile
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field, replace
from datetime import datetime
from functools import cached_property
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np

from acquire.calibration.calfile import Refused, check_members, parse_json, read_file, read_npy
from acquire.calibration.methods import ErrorModel, canonical_name
from acquire.errors import CalError
from acquire.jsonclean import json_safe
from acquire.storage import safe_component, write_new
from acquire.sweep import Sweep
from acquire.utc import compact_utc, minute_text, parse_utc, utc_text
from acquire.utc import utc_now as utc_clock
from drivers.stimulus import Stimulus
from drivers.yamlnode import one_line, show

FORMAT = "sweepd-calset"
VERSION = 1
AGAIN = "-again"  # suffix of a load's second raw reading, taken without reconnecting
SUFFIX = ".calset"
HEADER = "header.json"
_ZIP_DATE = (1980, 1, 1, 0, 0, 0)


def utc_now() -> str:
    """The current UTC time in the cal set's timestamp format (microseconds, ``Z``)."""
    return utc_text(digits=6)


@dataclass(frozen=True, eq=False)
class CalSet:
    """One calibration: error terms, raw standard readings and validity fingerprint."""

    plan: str
    model: ErrorModel
    stimulus: Stimulus
    instrument: str
    kit_name: str
    kit_sha256: str
    reference_plane: str = ""
    port: int = 1
    created_utc: str = field(default_factory=utc_now)
    raw: Mapping[str, np.ndarray] = field(default_factory=dict)
    figures: Mapping[str, Any] = field(default_factory=dict)
    temperature_c: float | None = None
    interpolation: Mapping[str, Any] | None = None

    def __post_init__(self) -> None:
        raw = {}
        for name, arr in self.raw.items():
            a = np.array(arr, dtype=np.complex128)
            a.flags.writeable = False
            raw[str(name)] = a
        object.__setattr__(self, "raw", MappingProxyType(raw))
        object.__setattr__(self, "figures", MappingProxyType(json_safe(dict(self.figures))))
        if self.interpolation is not None:
            object.__setattr__(self, "interpolation",
                               MappingProxyType(json_safe(dict(self.interpolation))))
        _parse_time(self.created_utc)  # fail early on a malformed timestamp

    # -- identity and age ----------------------------------------------------------------
    @property
    def method(self) -> str:
        return self.model.method

    @property
    def freq_hz(self) -> np.ndarray:
        return self.model.freq_hz

    @property
    def created(self) -> datetime:
        return _parse_time(self.created_utc)

    @property
    def when(self) -> str:
        """Creation time for messages: ``2026-12-02T06:10Z``."""
        return minute_text(self.created)

    @property
    def interpolated(self) -> bool:
        return self.interpolation is not None

    @cached_property
    def content_sha256(self) -> str:
        digest = hashlib.sha256()
        digest.update(_dump_json(self._header_core()))
        for name, arr in self._arrays():
            digest.update(f"{name}\0{arr.dtype.str}\0{arr.shape}\0".encode())
            digest.update(np.ascontiguousarray(arr).tobytes())
        return digest.hexdigest()

    @property
    def id(self) -> str:
        stamp = compact_utc(self.created)
        return f"{stamp}-{safe_component(self.plan, max_len=40)}-{self.content_sha256[:10]}"

    def age_s(self, now: datetime | None = None) -> float:
        now = now or utc_clock()
        return (now - self.created).total_seconds()

    # -- applying --------------------------------------------------------------------------
    def correct(self, sweep: Sweep, now: datetime | None = None) -> Sweep:
        """Corrected copy of ``sweep`` with the cal id, method, age and flags in its meta.

        Judge validity first (``acquire.calibration.validity``); this only requires the
        same grid.
        """
        source_id = self.interpolation["from"] if self.interpolation else self.id
        return self.model.correct(
            sweep, cal_id=source_id, cal_method=self.method, cal_age_s=self.age_s(now),
            cal_interpolated=self.interpolated, cal_reference_plane=self.reference_plane,
        )

    # -- storage ---------------------------------------------------------------------------
    def to_bytes(self) -> bytes:
        """The file image (deterministic: same cal set, same bytes)."""
        header = {**self._header_core(), "id": self.id, "content_sha256": self.content_sha256}
        buf = io.BytesIO()
        with zipfile.ZipFile(buf, "w", zipfile.ZIP_STORED) as zf:
            _put(zf, HEADER, _dump_json(header))
            for name, arr in self._arrays():
                member = io.BytesIO()
                np.lib.format.write_array(member, np.ascontiguousarray(arr), allow_pickle=False)
                _put(zf, name, member.getvalue())
        return buf.getvalue()

    def save(self, cal_dir: Path | str) -> Path:
        """Write atomically as ``<cal_dir>/<id>.calset``; never replaces a file."""
        try:
            return write_new(Path(cal_dir) / f"{self.id}{SUFFIX}", self.to_bytes())
        except OSError as exc:
            from acquire.errors import StorageError

            raise StorageError(f"cal set {self.id}: cannot write to {cal_dir} "
                               f"({exc.strerror or exc})") from None

    @classmethod
    def load(cls, path: Path | str) -> CalSet:
        """Read and verify a cal set file; ``CalError`` with one line on any problem."""
        path = Path(path)
        return cls.from_bytes(_read_file(path), str(path))

    @classmethod
    def from_bytes(cls, data: bytes, source: str = "<memory>") -> CalSet:
        return _Reader(data, source).calset()

    # -- internals ---------------------------------------------------------------------------
    def _header_core(self) -> dict[str, Any]:
        st = self.stimulus
        return {
            "format": FORMAT, "version": VERSION, "plan": self.plan, "method": self.method,
            "port": int(self.port), "instrument": self.instrument,
            "reference_plane": self.reference_plane, "created_utc": self.created_utc,
            "stimulus": {"start_hz": float(st.start_hz), "stop_hz": float(st.stop_hz),
                         "points": int(st.points), "power_dbm": float(st.power_dbm),
                         "if_bandwidth_hz": float(st.if_bandwidth_hz),
                         "averaging": int(st.averaging)},
            "kit": {"name": self.kit_name, "sha256": self.kit_sha256},
            "temperature_c": None if self.temperature_c is None else float(self.temperature_c),
            "interpolation": None if self.interpolation is None else dict(self.interpolation),
            "figures": dict(self.figures),
            "terms": sorted(self.model.flat_terms()),
            "raw": sorted(self.raw),
        }

    def _arrays(self) -> Iterator[tuple[str, np.ndarray]]:
        yield "freq_hz.npy", self.model.freq_hz
        terms = self.model.flat_terms()
        for name in sorted(terms):
            yield f"terms/{name}.npy", np.asarray(terms[name], np.complex128)
        for name in sorted(self.raw):
            yield f"raw/{name}.npy", self.raw[name]


def read_header(path: Path | str) -> dict[str, Any]:
    """Only the JSON header of a cal set file (cheap; for finding the right one)."""
    path = Path(path)
    return _Reader(_read_file(path), str(path)).header


def _read_file(path: Path) -> bytes:
    """The bytes of a cal set file (bounded); ``CalError`` with one line otherwise."""
    try:
        return read_file(path)
    except FileNotFoundError:
        raise CalError(f"cal set {path}: file not found") from None
    except OSError as exc:
        raise CalError(f"cal set {path}: cannot read ({exc.strerror})") from None
    except Refused as exc:
        raise CalError(f"cal set {path}: {exc}") from None


def replace_grid(cal: CalSet, model: ErrorModel, interpolation: Mapping[str, Any]) -> CalSet:
    """A cal set on another grid (interpolated); raw readings, being on the old grid, go."""
    f = model.freq_hz
    stimulus = replace(cal.stimulus, start_hz=float(f[0]), stop_hz=float(f[-1]), points=f.size)
    return replace(cal, model=model, stimulus=stimulus, raw={}, interpolation=interpolation)


# -- reading -----------------------------------------------------------------------------------


class _Reader:
    """Parses and verifies one cal set file image; every failure is one ``CalError`` line."""

    def __init__(self, data: bytes, source: str) -> None:
        self.source = source
        try:
            self.zip = zipfile.ZipFile(io.BytesIO(data))
        except (zipfile.BadZipFile, ValueError, EOFError, OSError):
            self.fail(f"not a readable cal set (damaged or truncated file, {len(data)} bytes)")
        try:
            check_members(self.zip)
            header = parse_json(self.member(HEADER), HEADER)
        except Refused as exc:
            self.fail(str(exc))
        if not isinstance(header, dict):
            self.fail(f"{HEADER} must hold a JSON object")
        fmt = header.get("format")
        if fmt != FORMAT:
            self.fail(f"not a sweepd cal set (format {show(fmt)}, expected '{FORMAT}')")
        version = header.get("version")
        if isinstance(version, bool) or not isinstance(version, int) or version < 1:
            self.fail(f"header key 'version': must be a positive integer, got {show(version)}")
        if version > VERSION:
            self.fail(f"format version {version} is newer than this sweepd reads ({VERSION}): "
                      "upgrade sweepd to use it")
        self.header = header
        for key, kind in (("plan", str), ("method", str), ("instrument", str),
                          ("created_utc", str), ("reference_plane", str), ("id", str),
                          ("content_sha256", str)):
            self.get(key, kind)

    def fail(self, message: str) -> Any:
        raise CalError(one_line(f"cal set {self.source}: {message}"))

    def member(self, name: str) -> bytes:
        try:
            return self.zip.read(name)
        except KeyError:
            return self.fail(f"missing member '{name}' (not a complete cal set)")
        except (zipfile.BadZipFile, OSError, EOFError, ValueError, NotImplementedError) as exc:
            return self.fail(f"member '{name}' is damaged ({exc})")

    def get(self, key: str, kind: type | tuple[type, ...], where: Mapping | None = None,
            prefix: str = "") -> Any:
        holder = self.header if where is None else where
        value = holder.get(key)
        ok = isinstance(value, kind) and not (isinstance(value, bool) and kind is not bool)
        if not ok:
            names = kind.__name__ if isinstance(kind, type) else "/".join(k.__name__ for k in kind)
            self.fail(f"header key '{prefix}{key}': expected {names}, got {show(value)}")
        return value

    def array(self, name: str, dtype: type, shape: tuple[int, ...]) -> np.ndarray:
        try:
            return read_npy(self.member(name), name, dtype, shape)
        except Refused as exc:
            return self.fail(str(exc))

    def calset(self) -> CalSet:
        h = self.header
        st = self.get("stimulus", dict)
        number = (int, float)
        try:
            stimulus = Stimulus(
                float(self.get("start_hz", number, st, "stimulus.")),
                float(self.get("stop_hz", number, st, "stimulus.")),
                self.get("points", int, st, "stimulus."),
                float(self.get("power_dbm", number, st, "stimulus.")),
                float(self.get("if_bandwidth_hz", number, st, "stimulus.")),
                self.get("averaging", int, st, "stimulus."),
            )
        except ValueError as exc:
            self.fail(f"header key 'stimulus': {exc}")
        kit = self.get("kit", dict)
        port = self.get("port", int)
        temperature = h.get("temperature_c")
        if temperature is not None and not isinstance(temperature, number):
            self.fail(f"header key 'temperature_c': expected a number or null, "
                      f"got {show(temperature)}")
        interpolation = h.get("interpolation")
        if interpolation is not None and not isinstance(interpolation, dict):
            self.fail("header key 'interpolation': expected an object or null")
        figures = self.get("figures", dict)
        term_names = self._names("terms")
        raw_names = self._names("raw")
        freq = self.array("freq_hz.npy", np.float64, (stimulus.points,))
        if not (np.all(np.isfinite(freq)) and np.all(np.diff(freq) > 0)):
            self.fail("freq_hz.npy is not a strictly increasing list of frequencies")
        n = (freq.size,)
        terms = {t: self.array(f"terms/{t}.npy", np.complex128, n) for t in term_names}
        raw = {r: self.array(f"raw/{r}.npy", np.complex128, n) for r in raw_names}
        try:
            canonical_name(h["method"], f"cal set {self.source}")  # warns on an older name
            model = ErrorModel.from_flat(h["method"], freq, terms)  # kept: the id covers it
        except (ValueError, KeyError) as exc:
            self.fail(f"error terms do not form a calibration: {exc}")
        try:
            cal = CalSet(h["plan"], model, stimulus, h["instrument"],
                         self.get("name", str, kit, "kit."), self.get("sha256", str, kit, "kit."),
                         h["reference_plane"], port, h["created_utc"], raw, figures,
                         temperature, interpolation)
        except ValueError as exc:
            self.fail(f"header: {exc}")
        if cal.content_sha256 != h["content_sha256"]:
            self.fail("content check failed: the file was altered or damaged")
        if cal.id != h["id"]:
            self.fail(f"id {show(h['id'])} does not match its content ({cal.id})")
        return cal

    def _names(self, key: str) -> list[str]:
        names = self.get(key, list)
        if not all(isinstance(n, str) and n and "/" not in n for n in names):
            self.fail(f"header key '{key}': expected a list of array names")
        return names


# -- helpers ------------------------------------------------------------------------------------


def _put(zf: zipfile.ZipFile, name: str, payload: bytes) -> None:
    info = zipfile.ZipInfo(name, date_time=_ZIP_DATE)
    info.compress_type = zipfile.ZIP_STORED
    info.external_attr = 0o644 << 16
    zf.writestr(info, payload)


def _dump_json(obj: Any) -> bytes:
    return json.dumps(obj, sort_keys=True, indent=1, ensure_ascii=True,
                      allow_nan=False).encode("ascii") + b"\n"


def _parse_time(text: str) -> datetime:
    try:
        return parse_utc(text)
    except (AttributeError, TypeError, ValueError):
        raise ValueError(f"created_utc must look like 2026-12-02T06:10:00.000000Z, "
                         f"got {show(text)}") from None


