"""Write sweeps as Touchstone 1.1 or 2.0 files.

Follows the writer checklist of the Touchstone File Format Specification 2.0 (IBIS Open
Forum, 2009): printable ASCII, one option line with every field explicit, 2-port
order 11 21 12 22 in version 1 and ``[Two-Port Data Order] 12_21`` in version 2, at
most four pairs per line in version 1 with each matrix row on a new line, angles in
degrees, Y/Z normalised in version 1 and absolute in version 2, keywords in the
specified order and ``[End]`` last. The data section is built as one byte matrix (one
row per frequency) from vectorised number formatting; only ``precision`` 16, 17 or
"full" falls back to Python's ``%e`` formatting, which is exact.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from decimal import Decimal
from pathlib import Path

import numpy as np

from acquire.errors import TouchstoneError
from acquire.storage import write_new
from acquire.sweep import Sweep
from acquire.units import format_frequency

from . import numformat
from .comments import MetaError, header_lines
from .convert import SingularAt, from_s, normalisation
from .model import FREQ_UNITS, TouchstoneOptions

#: dB value written for an exact zero: reads back as 0.0 (10**-500 underflows) and lies
#: below every non-zero double (about -6466 dB). Common practice is some such floor.
DB_ZERO = -10000.0
_PAIRS_PER_LINE = 4
_EXP3 = re.compile(rb"e([+-])(\d\d)(?!\d)")


def format_touchstone(sweep: Sweep, options: TouchstoneOptions | None = None,
                      comments: Sequence[str] = ()) -> str:
    """The text of a Touchstone file for ``sweep`` (see :class:`TouchstoneOptions`)."""
    return render(sweep, options or TouchstoneOptions(), comments, "<text>").decode("ascii")


def write_touchstone(path: Path | str, sweep: Sweep, options: TouchstoneOptions | None = None,
                     comments: Sequence[str] = (), *, unique: bool = True) -> Path:
    """Write a new file atomically, never overwriting; returns the path actually used.

    The name should end in ``.sNp`` with N the port count (``.ts`` is accepted for
    version 2.0); if it is taken, ``name-2.sNp`` and so on is used, or with
    ``unique=False`` ``FileExistsError`` is raised (as ``acquire.storage.write_new``).
    """
    options = options or TouchstoneOptions()
    path = Path(path)
    check_file_name(path, sweep.ports, options)
    payload = render(sweep, options, comments, str(path))
    try:
        return write_new(path, payload, unique=unique)
    except FileExistsError:
        raise
    except OSError as exc:
        raise TouchstoneError(f"touchstone {path}: cannot write ({exc.strerror or exc})") from None


def check_file_name(path: Path, ports: int, options: TouchstoneOptions) -> None:
    """Refuse a name whose ``.sNp`` extension disagrees with the data."""
    suffix = path.suffix.lower()
    match = re.fullmatch(r"\.([a-z])(\d+)p", suffix)
    letters = {"s", options.parameter.lower()}
    if match and match.group(1) in letters:
        if int(match.group(2)) != ports:
            raise TouchstoneError(
                f"touchstone {path}: the name says {int(match.group(2))} ports but the sweep "
                f"has {ports} (use .s{ports}p)")
        return
    if suffix == ".ts" and options.version == "2.0":
        return
    if options.version == "2.0":
        raise TouchstoneError(f"touchstone {path}: file name must end in .s{ports}p or .ts")
    raise TouchstoneError(f"touchstone {path}: file name must end in .s{ports}p (version 1.1 "
                          "readers take the port count from it)")


def render(sweep: Sweep, options: TouchstoneOptions, comments: Sequence[str],
           name: str) -> bytes:
    """The complete file as ASCII bytes."""
    where = f"touchstone {name}"
    _check_sweep(sweep, where)
    z0 = np.array(sweep.z0, dtype=np.float64)
    data = sweep.s
    if options.parameter != "S":
        try:
            data = from_s(sweep.s, options.parameter, z0)
        except SingularAt as exc:
            raise TouchstoneError(
                f"{where}: the data have no {options.parameter}-parameters at "
                f"{format_frequency(sweep.freq_hz[exc.index])} (singular matrix)") from None
        _check_finite(data, sweep.freq_hz, options.parameter, where)
        if options.version == "1.1":
            data = data * normalisation(options.parameter, z0, sweep.ports)
    if isinstance(comments, str):
        comments = [comments]
    try:
        head = header_lines(sweep.meta, comments)
    except MetaError as exc:
        raise TouchstoneError(f"{where}: {exc}") from None
    head += _keyword_lines(sweep, options, z0)
    body = _data_bytes(sweep.freq_hz, data, options)
    tail = b"[End]\n" if options.version == "2.0" else b""
    return ("\n".join(head) + "\n").encode("ascii") + body + tail


def _number(value: float) -> str:
    text = repr(float(value))
    return text[:-2] if text.endswith(".0") else text


def _keyword_lines(sweep: Sweep, options: TouchstoneOptions, z0: np.ndarray) -> list[str]:
    same = bool(np.all(z0 == z0[0]))
    refs = " ".join(_number(r) for r in (z0[:1] if same else z0))
    if options.version == "1.1":
        return [f"# {options.freq_unit} {options.parameter} {options.fmt} R {refs}"]
    lines = ["[Version] 2.0",
             f"# {options.freq_unit} {options.parameter} {options.fmt} R {_number(z0[0])}",
             f"[Number of Ports] {sweep.ports}"]
    if sweep.ports == 2:
        lines.append("[Two-Port Data Order] 12_21")
    lines.append(f"[Number of Frequencies] {sweep.points}")
    if not same:
        lines.append(f"[Reference] {refs}")
    lines.append("[Network Data]")
    return lines


def _check_sweep(sweep: Sweep, where: str) -> None:
    freq = sweep.freq_hz
    if freq.size == 0:
        raise TouchstoneError(f"{where}: the sweep has no points")
    bad = np.flatnonzero(~np.isfinite(freq) | (freq < 0))
    if bad.size:
        raise TouchstoneError(f"{where}: frequency {freq[bad[0]]!r} at point {bad[0]} is not a "
                              "finite, non-negative number")
    step = np.flatnonzero(np.diff(freq) <= 0)
    if step.size:
        k = int(step[0]) + 1
        raise TouchstoneError(f"{where}: frequencies must increase strictly; point {k} "
                              f"({freq[k]!r} Hz) follows {freq[k - 1]!r} Hz")
    z0 = np.array(sweep.z0)
    if not np.all(np.isfinite(z0) & (z0 > 0)):
        raise TouchstoneError(f"{where}: reference impedances must be positive, got {sweep.z0}")
    _check_finite(sweep.s, freq, "S", where)


def _check_finite(data: np.ndarray, freq: np.ndarray, parameter: str, where: str) -> None:
    bad = np.argwhere(~np.isfinite(data))
    if bad.size:
        k, i, j = (int(v) for v in bad[0])
        raise TouchstoneError(
            f"{where}: {parameter}{i + 1}{j + 1} at {format_frequency(freq[k])} is "
            f"{data[k, i, j]} (NaN/Inf cannot be written)")


def _line_plan(ports: int) -> list[int]:
    """Pairs on each line of one data set: one line up to 2 ports, else rows of <= 4."""
    if ports <= 2:
        return [ports * ports]
    row = [_PAIRS_PER_LINE] * (ports // _PAIRS_PER_LINE)
    if ports % _PAIRS_PER_LINE:
        row.append(ports % _PAIRS_PER_LINE)
    return row * ports


def _value_columns(data: np.ndarray, options: TouchstoneOptions) -> np.ndarray:
    """(n, 2*p*p) numbers in file order: 11 21 12 22 for a 1.1 2-port, else row-major."""
    n, ports = data.shape[0], data.shape[1]
    if options.version == "1.1" and ports == 2:
        data = data.transpose(0, 2, 1)
    flat = data.reshape(n, ports * ports)
    out = np.empty((n, 2 * ports * ports), dtype=np.float64)
    if options.fmt == "RI":
        out[:, 0::2], out[:, 1::2] = flat.real, flat.imag
    else:
        mag = np.abs(flat)
        if options.fmt == "DB":
            with np.errstate(divide="ignore"):
                mag = np.where(mag > 0, 20.0 * np.log10(mag), DB_ZERO)
        out[:, 0::2], out[:, 1::2] = mag, np.degrees(np.angle(flat))
    return out


def _data_bytes(freq: np.ndarray, data: np.ndarray, options: TouchstoneOptions) -> bytes:
    n, ports = data.shape[0], data.shape[1]
    digits = options.digits
    exact = digits > numformat.MAX_FAST_DIGITS
    values = _value_columns(data, options)
    fields = _python_fields(values, digits) if exact else numformat.scientific_fields(
        values, digits)
    width = fields.shape[1]
    fields = fields.reshape(n, values.shape[1], width)
    ffields = frequency_fields(freq, FREQ_UNITS[options.freq_unit], exact)
    fwidth = ffields.shape[1]
    plan = _line_plan(ports)
    record = sum(fwidth + 2 * pairs * (width + 1) + 1 for pairs in plan)
    buf = np.full((n, record), ord(" "), dtype=np.uint8)
    buf[:, :fwidth] = ffields
    pos = col = 0
    for pairs in plan:
        pos += fwidth
        count = 2 * pairs
        slots = np.lib.stride_tricks.as_strided(
            buf[:, pos:], shape=(n, count, width + 1), strides=(record, width + 1, 1))
        slots[:, :, 1:] = fields[:, col:col + count]
        pos += count * (width + 1)
        col += count
        buf[:, pos] = ord("\n")
        pos += 1
    return buf.tobytes()


def _python_fields(values: np.ndarray, digits: int) -> np.ndarray:
    """Exact ``% .{digits-1}e`` fields (sign slot, fixed width) for 16/17 digits."""
    flat = values.ravel().tolist()
    text = ((f"% .{digits - 1}e" * len(flat)) % tuple(flat)).encode("ascii")
    width = numformat.scientific_width(digits, 2)
    if len(text) != width * len(flat):
        text = _EXP3.sub(rb"e\g<1>0\g<2>", text)
        width += 1
    return np.frombuffer(text, dtype=np.uint8).reshape(len(flat), width)


def frequency_fields(freq: np.ndarray, unit_exp: int, exact: bool) -> np.ndarray:
    """Frequencies as right-aligned decimals in the file unit, ``(n, width)`` uint8.

    Whole hertz values print exactly (the point is moved as text: 2450000001 Hz is
    ``2.450000001`` GHz). Otherwise the fast path keeps at least 17 significant digits
    for the largest and 13 for the smallest value (relative error under 1e-12, order
    preserved — checked); ``exact`` or anything unusual uses the shortest repr, exact.
    """
    top = float(freq.max())
    if top < 1e15:
        whole = np.floor(freq)
        if np.array_equal(whole, freq):
            return numformat.fixed_point_fields(whole.astype(np.int64), whole, 0, unit_exp)
        positive = freq[freq > 0]
        if not exact and positive.size:
            int_digits = len(str(int(top))) if top >= 1 else 1
            small = int(np.floor(np.log10(positive.min()))) + 1
            decimals = max(17 - int_digits, 13 - small, 0)
            if decimals <= numformat.MAX_FAST_DIGITS:
                ints = whole.astype(np.int64)
                fracs = np.rint((freq - whole) * 10.0**decimals).astype(np.int64)
                carry = fracs >= 10**decimals
                ints, fracs = ints + carry, np.where(carry, 0, fracs)
                di, df = np.diff(ints), np.diff(fracs)
                if np.all((di > 0) | ((di == 0) & (df > 0))):
                    return numformat.fixed_point_fields(ints, fracs, decimals, unit_exp)
    texts = _same_decimals([format(Decimal(repr(f)).scaleb(-unit_exp), "f")
                            for f in freq.tolist()])
    width = max(map(len, texts))
    joined = "".join(t.rjust(width) for t in texts).encode("ascii")
    return np.frombuffer(joined, dtype=np.uint8).reshape(len(texts), width)


def _same_decimals(texts: list[str]) -> list[str]:
    """Pad decimal strings with trailing zeros to one number of decimals (a regular column)."""
    def decimals(text: str) -> int:
        return len(text) - text.index(".") - 1 if "." in text else 0
    most = max(map(decimals, texts))
    if not most:
        return texts
    return [(t if "." in t else t + ".") + "0" * (most - decimals(t)) for t in texts]
