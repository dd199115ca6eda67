"""The unfinished-calibration file: raw steps measured so far, to resume from.

Written after every measurement as ``<cal dir>/<plan>.partial-cal`` (replaced atomically;
never a ``.calset``, so nothing ever applies it to a sweep) and removed once the cal set
is saved. A ZIP archive like a cal set: ``header.json``, ``freq_hz.npy`` (float64) and
``raw/<step>.<param>.npy`` (complex128; a param may hold a dot itself, as the switch
terms ``switch.forward`` and ``switch.reverse`` of an unknown-thru step do); no pickles.
Header keys: format ``sweepd-partial-cal``, version 1, plan, method, instrument,
stimulus, kit_name, kit_sha256, updated_utc and steps {name: {status, measured_utc}}.

A partial file is resumed only on the same plan, method, instrument, stimulus and kit
file, within the plan's maximum cal age; otherwise resuming is refused with the reason.
"""

from __future__ import annotations

import io
import json
import zipfile
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any

import numpy as np

from acquire.calibration.calfile import Refused, check_members, parse_json, read_file, read_npy
from acquire.calibration.methods import canonical_name
from acquire.errors import CalError
from acquire.storage import replace_atomic, safe_component
from acquire.units import format_duration
from acquire.utc import parse_utc, utc_now
from acquire.utc import utc_text as utc_form
from drivers.stimulus import Stimulus

FORMAT = "sweepd-partial-cal"
VERSION = 1
SUFFIX = ".partial-cal"
HEADER = "header.json"


def utc_text(moment: datetime | None = None) -> str:
    """Partial-cal file timestamps: UTC with microseconds and ``Z``."""
    return utc_form(moment, digits=6)


def partial_path(cal_dir: Path, plan: str) -> Path:
    return Path(cal_dir) / f"{safe_component(plan, max_len=60)}{SUFFIX}"


@dataclass(frozen=True)
class Fingerprint:
    """What must match for measured steps to be reused."""

    plan: str
    method: str
    instrument: str
    stimulus: Stimulus
    kit_name: str
    kit_sha256: str

    def as_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["stimulus"] = asdict(self.stimulus)
        return d


@dataclass
class Partial:
    """Raw readings per step with their status (``done`` or ``repeat``)."""

    fingerprint: Fingerprint
    readings: dict[str, dict[str, np.ndarray]] = field(default_factory=dict)
    status: dict[str, str] = field(default_factory=dict)
    measured_utc: dict[str, str] = field(default_factory=dict)
    updated_utc: str = field(default_factory=utc_text)
    freq_hz: np.ndarray | None = None

    def to_bytes(self) -> bytes:
        header = {"format": FORMAT, "version": VERSION, **self.fingerprint.as_dict(),
                  "updated_utc": self.updated_utc,
                  "steps": {name: {"status": self.status.get(name, "done"),
                                   "measured_utc": self.measured_utc.get(name, "")}
                            for name in self.readings}}
        buf = io.BytesIO()
        with zipfile.ZipFile(buf, "w", zipfile.ZIP_STORED) as zf:
            zf.writestr(HEADER, json.dumps(header, sort_keys=True, indent=1))
            if self.freq_hz is not None:
                member = io.BytesIO()
                np.lib.format.write_array(member, np.asarray(self.freq_hz, np.float64),
                                          allow_pickle=False)
                zf.writestr("freq_hz.npy", member.getvalue())
            for step, params in self.readings.items():
                for param, values in params.items():
                    member = io.BytesIO()
                    np.lib.format.write_array(member, np.asarray(values, np.complex128),
                                              allow_pickle=False)
                    zf.writestr(f"raw/{step}.{param}.npy", member.getvalue())
        return buf.getvalue()

    def save(self, path: Path) -> Path:
        self.updated_utc = utc_text()
        return replace_atomic(path, self.to_bytes())

    def age_s(self) -> float:
        return (utc_now() - parse_utc(self.updated_utc)).total_seconds()

    def mismatch(self, want: Fingerprint, max_age_s: float | None) -> str:
        """Why these readings may not be reused for ``want`` ('' when they may)."""
        have = self.fingerprint
        for label, a, b in (("plan", have.plan, want.plan), ("method", have.method, want.method),
                            ("instrument", have.instrument, want.instrument),
                            ("stimulus", have.stimulus, want.stimulus),
                            ("cal kit file", have.kit_sha256, want.kit_sha256)):
            if a != b:
                return f"it was made with another {label}"
        age = self.age_s()
        if age < -300:
            return "it is dated in the future (check the system clock)"
        if max_age_s is not None and age > max_age_s:
            return f"it is {format_duration(age)} old (max {format_duration(max_age_s)})"
        return ""


def load_partial(path: Path) -> Partial:
    """Read an unfinished-calibration file; ``CalError`` (one line) if it is damaged."""
    where = f"unfinished calibration {path}"
    try:
        with zipfile.ZipFile(io.BytesIO(read_file(path))) as zf:
            check_members(zf)  # bounded like a cal set: size, members, no compression
            header = parse_json(zf.read(HEADER), HEADER)
            if header.get("format") != FORMAT or header.get("version") != VERSION:
                raise CalError(f"{where}: not a version {VERSION} {FORMAT} file")
            st = header["stimulus"]
            fp = Fingerprint(str(header["plan"]), canonical_name(str(header["method"]), where),
                             str(header["instrument"]), Stimulus(**st),
                             str(header["kit_name"]), str(header["kit_sha256"]))
            partial = Partial(fp, updated_utc=str(header["updated_utc"]))
            points = (fp.stimulus.points,)
            for step, info in header["steps"].items():
                partial.status[step] = "repeat" if info["status"] == "repeat" else "done"
                partial.measured_utc[step] = str(info.get("measured_utc", ""))
                partial.readings[step] = {}
            if "freq_hz.npy" in zf.namelist():
                freq = read_npy(zf.read("freq_hz.npy"), "freq_hz.npy", np.float64, points)
                partial.freq_hz = np.asarray(freq, np.float64)
            for name in zf.namelist():
                if not (name.startswith("raw/") and name.endswith(".npy")):
                    continue
                step, param = _step_and_param(name[4:-4], partial.readings)
                if not step:
                    raise CalError(f"{where}: member {name} belongs to no listed step")
                arr = read_npy(zf.read(name), name, np.complex128, points)
                partial.readings[step][param] = np.asarray(arr, np.complex128)
            parse_utc(partial.updated_utc)
            return partial
    except CalError:
        raise
    except FileNotFoundError:
        raise CalError(f"{where}: file not found") from None
    except Refused as exc:
        raise CalError(f"{where}: {exc}") from None
    except (OSError, zipfile.BadZipFile, KeyError, TypeError, ValueError, AttributeError,
            json.JSONDecodeError, UnicodeDecodeError, OverflowError) as exc:
        detail = " ".join(str(exc).split())[:120]
        raise CalError(f"{where}: damaged or unreadable ({type(exc).__name__}: {detail})") \
            from None


def _step_and_param(stem: str, steps: Mapping[str, Any]) -> tuple[str, str]:
    """``<step>.<param>`` split after the longest listed step name (a reading's name may
    hold a dot itself: ``thru.switch.forward``); ``("", "")`` when no step fits."""
    step = max((s for s in steps if stem.startswith(f"{s}.")), key=len, default="")
    return step, stem[len(step) + 1:] if step else ""


def readings_fit(partial: Partial, steps: Mapping[str, tuple[str, ...]], points: int) -> str:
    """Why the readings don't fit these steps and grid ('' when they do)."""
    for step, params in partial.readings.items():
        if step not in steps:
            return f"it holds a step '{step}' this method does not have"
        for param in steps[step]:
            arr = params.get(param)
            if arr is None or arr.shape != (points,):
                return f"its {step} reading lacks {param} on {points} points"
    return ""
