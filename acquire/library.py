"""Where shipped configuration lives and how bare names find it.

A reference in a plan is either a path (relative to the plan's folder) or a bare name
such as ``generic-sma-50``. Bare names are looked up next to the plan first, then in the
shipped library ``configs/<kind>/<name>.yaml``.
"""

from __future__ import annotations

from pathlib import Path

from acquire.errors import ConfigError
from sweepd_configs import shipped_root

CONFIG_ROOT = shipped_root()
KINDS = ("dialects", "calkits", "masks", "plans", "cables")


def library_dir(kind: str) -> Path:
    """The shipped folder for one kind of config file."""
    if kind not in KINDS:
        raise ValueError(f"unknown config kind {kind!r}")
    return CONFIG_ROOT / kind


def is_bare_name(ref: str) -> bool:
    """True for ``generic-sma-50``; false for ``kits/x.yaml`` or ``x.yaml``."""
    return "/" not in ref and "\\" not in ref and not ref.endswith((".yaml", ".yml"))


def find_config(kind: str, ref: str, base_dir: Path | None = None) -> Path:
    """Resolve a config reference to an existing file or raise ``ConfigError``."""
    if is_bare_name(ref):
        candidates = []
        if base_dir is not None:
            candidates += [base_dir / f"{ref}.yaml", base_dir / kind / f"{ref}.yaml"]
        candidates.append(library_dir(kind) / f"{ref}.yaml")
        for path in candidates:
            if path.is_file():
                return path
        known = ", ".join(available(kind)) or "none"
        raise ConfigError(f"no {kind[:-1]} named '{ref}' (shipped: {known})")
    path = Path(ref).expanduser()
    if not path.is_absolute() and base_dir is not None:
        path = base_dir / path
    if not path.is_file():
        raise ConfigError(f"{kind[:-1]} file {path} not found")
    return path


def available(kind: str) -> list[str]:
    """Names of the shipped files of one kind."""
    return sorted(p.stem for p in library_dir(kind).glob("*.yaml"))
