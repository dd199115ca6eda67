"""The shipped library: dialects, cal kits, cable models, masks, plans and JSON schemas.

The folder ``configs/`` in the source tree is this package; it installs as
``sweepd_configs`` (pyproject maps the name), so a wheel carries the files and the code
finds them with ``importlib.resources`` wherever sweepd is installed. This module is the
lowest room of the house: acquire, drivers and simulators may all import it, and it
imports nothing of theirs.
"""

from __future__ import annotations

from importlib.resources import files
from pathlib import Path


def shipped_root() -> Path:
    """The folder holding the shipped files (a real folder: sweepd installs unzipped)."""
    root = files(__name__)
    if not isinstance(root, Path):
        raise RuntimeError(f"sweepd's shipped configs are not in a folder ({root!r}); "
                           "install sweepd unzipped (pip install does)")
    return root


def shipped_dir(kind: str) -> Path:
    """The shipped folder of one kind of file, e.g. ``shipped_dir("calkits")``."""
    return shipped_root() / kind
