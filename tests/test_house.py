"""The house rules: the shipped library travels as package data, the import graph of
acquire, drivers and simulators has no cycles, and modules and functions stay small.

These read the source with ``ast``; nothing here imports the code under test beyond the
shipped-library package.
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

import sweepd_configs

ROOT = Path(__file__).resolve().parents[1]
CODE_PACKAGES = ("acquire", "drivers", "simulators")

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - the suite runs on 3.11 here
    tomllib = None


def _sources() -> list[Path]:
    return sorted(p for pkg in CODE_PACKAGES for p in (ROOT / pkg).rglob("*.py"))


def test_shipped_library_is_the_configs_folder_found_through_importlib_resources():
    from acquire.library import CONFIG_ROOT, library_dir
    from drivers.dialect import DIALECT_DIR
    from simulators.calkit import KIT_DIR

    assert sweepd_configs.shipped_root() == ROOT / "configs"
    assert sweepd_configs.shipped_root() == CONFIG_ROOT
    assert sweepd_configs.shipped_dir("dialects") == DIALECT_DIR
    assert sweepd_configs.shipped_dir("calkits") == KIT_DIR
    assert (library_dir("plans") / "patch-line-a.yaml").is_file()


def test_no_code_finds_configs_through_its_own_file_path():
    offenders = []
    for path in _sources():
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.Constant) and node.value == "configs":
                offenders.append(f"{path.relative_to(ROOT)}:{node.lineno}")
    assert not offenders, f"use sweepd_configs.shipped_dir(), not a path literal: {offenders}"


def test_package_data_globs_ship_every_file_in_configs():
    if tomllib is None:  # pragma: no cover
        raise AssertionError("needs Python 3.11 (tomllib)")
    project = tomllib.loads((ROOT / "pyproject.toml").read_text())
    patterns = project["tool"]["setuptools"]["package-data"]["sweepd_configs"]
    folder = ROOT / "configs"
    shipped = {p for pattern in patterns for p in folder.glob(pattern) if p.is_file()}
    wanted = {p for p in folder.rglob("*") if p.is_file()
              and p.suffix not in {".py", ".pyc"} and "results" not in p.parts}
    assert wanted - shipped == set(), "pyproject package-data misses these files"
