"""Dialects: what an analyzer's commands look like and how its data travel.

A dialect is a validated YAML file (schema: configs/dialects/README.md). Supporting a new
instrument means writing one, not Python. ``load_dialect("scpi-generic")`` reads
``configs/dialects/scpi-generic.yaml``; any other reference is a path. The validated form
lives in ``drivers.dialect_model`` (re-exported here), the validation in
``drivers.dialect_parse``; imports go model <- parse <- this module, never back.
"""

from __future__ import annotations

from pathlib import Path

from drivers.dialect_model import (
    REQUIRED_SETTINGS,
    SETTING_NAMES,
    STANDARDS,
    SWITCH_REPLIES,
    SWITCH_TERMS,
    WAIT_MODES,
    ByteOrders,
    DataFormat,
    Dialect,
    SettingSpec,
    SwitchSpec,
    shown_path,
)
from drivers.dialect_parse import parse_dialect_file
from drivers.errors import DialectError
from sweepd_configs import shipped_dir

__all__ = [
    "DIALECT_DIR",
    "REQUIRED_SETTINGS",
    "SETTING_NAMES",
    "STANDARDS",
    "SWITCH_REPLIES",
    "SWITCH_TERMS",
    "WAIT_MODES",
    "ByteOrders",
    "DataFormat",
    "Dialect",
    "SettingSpec",
    "SwitchSpec",
    "dialect_path",
    "load_dialect",
    "shown_path",
]

DIALECT_DIR = shipped_dir("dialects")


def dialect_path(ref: str | Path) -> Path:
    """A bare name is looked up in the shipped folder; anything else is a path."""
    text = str(ref)
    bare = "/" not in text and "\\" not in text and not text.endswith((".yaml", ".yml"))
    if isinstance(ref, str) and bare:
        path = DIALECT_DIR / f"{text}.yaml"
        if not path.is_file():
            shipped = ", ".join(sorted(p.stem for p in DIALECT_DIR.glob("*.yaml"))) or "none"
            raise DialectError(f"no dialect named '{text}' (shipped: {shipped})")
        return path
    return Path(ref).expanduser()


def load_dialect(ref: str | Path) -> Dialect:
    """Read and validate a dialect file; problems raise one-line ``DialectError``."""
    return parse_dialect_file(dialect_path(ref))
