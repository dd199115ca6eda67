"""``sweepd sim truth``: a device's true S-parameters on a grid, written as Touchstone.

The device options are those of ``sweepd sim`` (``--device KIND`` and ``--param
KEY=VALUE``). The file is Touchstone 1.1 (``# Hz S RI R 50``, 17 significant digits,
two-port data in the standard S11 S21 S12 S22 order), written to a temporary file in the
same folder and renamed, so a reader never sees half a file; an existing file is left
alone unless ``--force``. The simulator writes it itself: it never imports ``acquire``.
"""

from __future__ import annotations

import argparse
import os
import tempfile
from pathlib import Path
from typing import TextIO

import numpy as np

from simulators.devices import device_params, make_device
from simulators.errors import SimError

MAX_POINTS = 200_001


_UNITS = {"hz": 1.0, "khz": 1e3, "mhz": 1e6, "ghz": 1e9}


def frequency(text: str, option: str) -> float:
    """'10e6', '10 MHz' or '6GHz' in Hz; ``SimError`` naming the option."""
    raw = str(text).strip()
    number = raw.rstrip("aAbBcCdDeEfFgGhHiIjJkKlLmMnNoOpPqQrRsStTuUvVwWxXyYzZ ")
    unit = raw[len(number):].strip().lower() or "hz"
    if number.endswith(("e", "E")):  # '1e' + 'GHz'? not a number
        number, unit = raw, "hz"
    try:
        return float(number) * _UNITS[unit]
    except (KeyError, ValueError):
        raise SimError(f"{option}: expected a frequency such as 10e6 or '10 MHz', "
                       f"got {text!r}") from None


def grid(start: float, stop: float, points: int) -> np.ndarray:
    """The linear grid, as the analyzer builds it; ``SimError`` naming the bad option."""
    if not (np.isfinite(start) and start > 0):
        raise SimError(f"--start: must be a frequency above 0 Hz, got {start:g}")
    if not (np.isfinite(stop) and stop >= start):
        raise SimError(f"--stop: must be at or above --start ({start:g} Hz), got {stop:g}")
    if not 1 <= points <= MAX_POINTS:
        raise SimError(f"--points: must be 1 to {MAX_POINTS}, got {points}")
    if points > 1 and stop == start:
        raise SimError("--stop: must be above --start for more than one point")
    return np.linspace(start, stop, points)


def touchstone_text(freq_hz: np.ndarray, s: np.ndarray, comment: str) -> str:
    """Touchstone 1.1 text of (n, p, p) S-parameters, p = 1 or 2, RI, Hz, 50 Ω."""
    ports = s.shape[1]
    order = [(0, 0)] if ports == 1 else [(0, 0), (1, 0), (0, 1), (1, 1)]
    lines = [f"! {comment}", "# Hz S RI R 50"]
    for k, f in enumerate(freq_hz):
        values = " ".join(f"{s[k, i, j].real:.17g} {s[k, i, j].imag:.17g}" for i, j in order)
        lines.append(f"{f:.17g} {values}")
    return "\n".join(lines) + "\n"


def write_truth(args: argparse.Namespace, params: dict, out: TextIO) -> int:
    """Write the file; print its path; exit code 0."""
    device = make_device(args.device, **params)
    path = Path(args.output)
    want = f".s{device.ports}p"
    if path.suffix.lower() != want:
        raise SimError(f"-o {path}: a {device.ports}-port device ({device.kind}) goes in a "
                       f"{want} file")
    if path.exists() and not args.force:
        raise SimError(f"-o {path}: the file exists (give --force to replace it)")
    freq = grid(frequency(args.start, "--start"), frequency(args.stop, "--stop"), args.points)
    described = " ".join(f"{k}={v}" for k, v in device_params(device).items())
    text = touchstone_text(freq, device.s(freq), f"sweepd simulator truth: {described}")
    _atomic_write(path, text)
    print(path, file=out)
    return 0


def _atomic_write(path: Path, text: str) -> None:
    folder = path.parent if str(path.parent) else Path()
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=folder)
    except OSError as exc:
        raise SimError(f"-o {path}: cannot write there ({exc.strerror})") from None
    try:
        with os.fdopen(fd, "w", encoding="ascii") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except OSError as exc:
        Path(tmp).unlink(missing_ok=True)
        raise SimError(f"-o {path}: cannot write it ({exc.strerror})") from None
