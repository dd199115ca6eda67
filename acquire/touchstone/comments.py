"""Comment lines: sweep metadata as ``! key: <JSON>`` lines, and ASCII-safe free text.

Layout written at the top of every file::

    ! written by sweepd
    ! plan: "patch-2g45"
    ! serial: "A0042"
    !
    ! verdict: pass (free comment lines follow the blank separator)

The reader takes metadata only from the block right after the marker, up to the first
line that is not ``key: <valid JSON>``, so free comments never turn into metadata.
"""

from __future__ import annotations

import json
import re
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

from acquire.safejson import loads_bounded

MARKER = "written by sweepd"
_KEY = re.compile(r"[A-Za-z0-9_.-]+\Z")
_META_LINE = re.compile(r"([A-Za-z0-9_.-]+): (.*)\Z")
_UNSAFE = re.compile(r"[^\t\x20-\x7e]")


class MetaError(ValueError):
    """A metadata entry cannot be written (bad key or value that is not JSON)."""


def ascii_text(text: str) -> str:
    """``text`` with everything outside printable ASCII escaped (``\\xb5``, ``\\u03a9``)."""
    return _UNSAFE.sub(lambda m: m.group().encode("unicode_escape").decode("ascii"), text)


def header_lines(meta: Mapping[str, Any], comments: Sequence[str]) -> list[str]:
    """Comment lines (without line ends) for the top of a file."""
    lines = [f"! {MARKER}"]
    for key, value in meta.items():
        if not isinstance(key, str) or not _KEY.match(key):
            raise MetaError(f"meta key {key!r} must match [A-Za-z0-9_.-]+")
        try:
            text = json.dumps(value, separators=(",", ":"), ensure_ascii=True, allow_nan=False)
        except (TypeError, ValueError) as exc:
            raise MetaError(f"meta key {key!r}: value is not plain JSON ({exc})") from None
        lines.append(f"! {key}: {text}")
    free = [line for text in comments for line in (str(text).splitlines() or [""])]
    if free:
        lines.append("!")
        lines.extend(f"! {ascii_text(line)}".rstrip() for line in free)
    return lines


def comment_text(raw: str) -> str:
    """Comment text as stored in TouchstoneFile.comments: one leading space dropped."""
    text = raw[1:] if raw.startswith(" ") else raw
    return text.rstrip()


def split_meta(comments: Iterable[str]) -> tuple[dict[str, Any], list[str]]:
    """Recover metadata from leading comments; return (meta, remaining comments)."""
    texts = list(comments)
    if not texts or texts[0] != MARKER:
        return {}, texts
    meta: dict[str, Any] = {}
    k = 1
    while k < len(texts):
        match = _META_LINE.match(texts[k])
        if match is None:
            break
        try:
            meta[match.group(1)] = loads_bounded(match.group(2))
        except ValueError:
            break
        k += 1
    if k < len(texts) and texts[k] == "":
        k += 1
    return meta, texts[k:]
