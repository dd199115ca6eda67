"""Bounded reading of a cal set file image: size, ZIP members, JSON header, ``.npy`` arrays.

Every limit is checked before memory is committed, so a hostile or damaged file (deep
JSON, huge integers, ``1e999``: see ``acquire.safejson``; an array header claiming 10^12
elements, a compressed member that inflates to gigabytes) costs no more than a valid
one. Problems raise ``Refused`` with a short reason; ``acquire.calibration.calset`` adds
the file name.
"""

from __future__ import annotations

import io
import math
import zipfile
from pathlib import Path
from typing import Any

import numpy as np

from acquire.safejson import loads_bounded
from drivers.yamlnode import show

MAX_FILE_BYTES = 256 * 1024 * 1024  # 64 arrays of 200,001 complex points fit easily
MAX_HEADER_BYTES = 1024 * 1024
MAX_MEMBERS = 128
MAX_JSON_DEPTH = 16


class Refused(Exception):
    """The file image is beyond a limit or malformed; the message says which."""


def read_file(path: Path) -> bytes:
    """The bytes of a file, refusing one larger than ``MAX_FILE_BYTES`` unread.

    ``OSError`` passes through (the caller words "not found" and "cannot read").
    """
    with open(path, "rb") as handle:
        data = handle.read(MAX_FILE_BYTES + 1)
    if len(data) > MAX_FILE_BYTES:
        raise Refused(f"larger than {MAX_FILE_BYTES >> 20} MiB; not a cal set")
    return data


def check_members(archive: zipfile.ZipFile) -> None:
    """Refuse too many members and compressed ones (ours are stored: no zip bombs)."""
    members = archive.infolist()
    if len(members) > MAX_MEMBERS:
        raise Refused(f"{len(members)} members, more than a cal set holds ({MAX_MEMBERS})")
    for info in members:
        if info.compress_type != zipfile.ZIP_STORED or info.file_size != info.compress_size:
            raise Refused(f"member {show(info.filename)} is compressed; cal set members are "
                          "stored as they are (a damaged or foreign file)")


def parse_json(raw: bytes, name: str) -> Any:
    """JSON with finite numbers, integers of at most 19 digits and bounded depth."""
    if len(raw) > MAX_HEADER_BYTES:
        raise Refused(f"{name} is larger than {MAX_HEADER_BYTES >> 20} MiB")
    try:
        return loads_bounded(raw.decode("utf-8"), MAX_JSON_DEPTH)
    except UnicodeDecodeError as exc:
        raise Refused(f"{name} is not UTF-8 (byte {exc.start})") from None
    except ValueError as exc:
        raise Refused(f"{name} is not valid JSON ({str(exc)[:120]})") from None


def read_npy(raw: bytes, name: str, dtype: type, shape: tuple[int, ...]) -> np.ndarray:
    """An ``.npy`` image whose header must promise ``dtype`` and ``shape`` (checked before
    anything is allocated) and whose data must be exactly that long. No pickles."""
    stream = io.BytesIO(raw)
    try:
        major, _minor = np.lib.format.read_magic(stream)
        read_header = (np.lib.format.read_array_header_1_0 if major == 1
                       else np.lib.format.read_array_header_2_0)
        got_shape, fortran, got_dtype = read_header(stream)
    except (ValueError, OSError, EOFError, SyntaxError, TypeError) as exc:
        raise Refused(f"array '{name}' is damaged ({str(exc)[:120]})") from None
    want = np.dtype(dtype)
    if got_dtype != want or tuple(got_shape) != shape:
        raise Refused(f"array '{name}' is {got_dtype}{show(list(got_shape))}, expected "
                      f"{want}{list(shape)}")
    data = raw[stream.tell():]
    if len(data) != math.prod(shape) * want.itemsize:
        raise Refused(f"array '{name}' is damaged ({len(data)} data bytes for {list(shape)})")
    array = np.frombuffer(data, dtype=want)
    return array.reshape(shape, order="F" if fortran else "C").copy()
