"""Content hashes of a capture's files, as the journal records them."""

from __future__ import annotations

import hashlib
from pathlib import Path


def file_sha256(path: Path | None) -> str | None:
    """The SHA-256 (hex) of a file's bytes as they are on disk; None without a file (the
    row is journalled all the same: a missing hash is seen, a lost row is not)."""
    if path is None:
        return None
    digest = hashlib.sha256()
    try:
        with open(path, "rb") as handle:
            for block in iter(lambda: handle.read(1 << 20), b""):
                digest.update(block)
    except FileNotFoundError:
        return None
    return digest.hexdigest()
