"""The house rules: the shipped library travels as package data, the import graph of
acquire, drivers and simulators has no cycles, and modules and functions stay small.

These read the source with ``ast``; nothing here imports the code under test beyond the
shipped-library package.
"""

from __future__ import annotations

import ast
import functools
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


# -- the import graph ----------------------------------------------------------------------

# Cycles that are being broken elsewhere, each with the issue point that removes it. The
# list only shrinks: an entry that is no longer a cycle fails the test until removed.
KNOWN_CYCLES: dict[frozenset[str], str] = {}

# Which top-level rooms each may import (DEVELOPERS.md, "Map of the house").
# The longest matching prefix rules: only the front doors to the simulator (the demo and
# the sim and fixture commands) may reach it from acquire.
MAY_IMPORT = {
    "acquire": {"acquire", "drivers", "sweepd_configs"},
    "acquire.commands": {"acquire", "drivers", "simulators", "sweepd_configs"},
    "acquire.demo": {"acquire", "drivers", "simulators", "sweepd_configs"},
    "drivers": {"drivers", "sweepd_configs"},
    "simulators": {"simulators", "sweepd_configs"},
    "sweepd_configs": {"sweepd_configs"},
}
SOURCE_ROOTS = {"acquire": "acquire", "drivers": "drivers", "simulators": "simulators",
                "sweepd_configs": "configs"}


def _module_files() -> dict[str, Path]:
    mods = {}
    for name, folder in SOURCE_ROOTS.items():
        for path in (ROOT / folder).rglob("*.py"):
            parts = [name, *path.relative_to(ROOT / folder).with_suffix("").parts]
            if parts[-1] == "__init__":
                parts.pop()
            mods[".".join(parts)] = path
    return mods


def _imported(module: str, node: ast.Import | ast.ImportFrom, is_package: bool,
              mods: dict[str, Path]) -> list[str]:
    """The project modules one import statement loads (at module or function level).

    ``from pkg import sub`` counts as importing ``pkg.sub``, not ``pkg``: every submodule
    loads its package first, so that edge is no cycle of ours."""
    if isinstance(node, ast.Import):
        names = [alias.name for alias in node.names]
    else:
        base = node.module or ""
        if node.level:
            parts = module.split(".")[: len(module.split(".")) - (0 if is_package else 1)]
            parts = parts[: len(parts) - (node.level - 1)]
            base = ".".join([*parts, base] if base else parts)
        names = [f"{base}.{a.name}" if f"{base}.{a.name}" in mods else base for a in node.names]
    found = []
    for name in names:
        while name and name not in mods:
            name = name.rpartition(".")[0]
        if name and name != module:
            found.append(name)
    return found


@functools.cache
def _import_graph() -> dict[str, set[str]]:
    mods = _module_files()
    graph: dict[str, set[str]] = {m: set() for m in mods}
    for module, path in mods.items():
        tree = ast.parse(path.read_text())
        for node in ast.walk(tree):
            if isinstance(node, (ast.Import, ast.ImportFrom)) and id(node) not in \
                    _type_checking_only(tree):
                graph[module].update(
                    _imported(module, node, path.name == "__init__.py", mods))
    return graph


def _type_checking_only(tree: ast.Module) -> set[int]:
    """Imports under ``if TYPE_CHECKING:``: for type hints only, never run, no cycle."""
    skipped: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and (
                (isinstance(node.test, ast.Name) and node.test.id == "TYPE_CHECKING")
                or (isinstance(node.test, ast.Attribute) and node.test.attr == "TYPE_CHECKING")):
            skipped.update(id(inner) for part in node.body for inner in ast.walk(part))
    return skipped


def _cycles(graph: dict[str, set[str]]) -> list[frozenset[str]]:
    """Strongly connected components with more than one module (Tarjan, iterative)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[frozenset[str]] = []
    for root in graph:
        if root in index:
            continue
        work = [(root, iter(sorted(graph[root])))]
        index[root] = low[root] = len(index)
        stack.append(root)
        on_stack.add(root)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = len(index)
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph[child]))))
                elif child in on_stack:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                component = set()
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    component.add(member)
                    if member == node:
                        break
                if len(component) > 1:
                    found.append(frozenset(component))
    return found


def test_cycle_finder_finds_a_cycle_and_ignores_a_chain():
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [
        frozenset({"a", "b", "c"})]
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": set()}) == []


def test_no_import_cycles_in_acquire_drivers_simulators():
    cycles = set(_cycles(_import_graph()))
    new = [sorted(c) for c in cycles - KNOWN_CYCLES.keys()]
    assert not new, f"import cycles (function-level imports count too): {new}"
    stale = [sorted(c) for c in KNOWN_CYCLES.keys() - cycles]
    assert not stale, f"no longer cycles: remove them from KNOWN_CYCLES: {stale}"


def test_imports_point_one_way_between_rooms():
    wrong = []
    for module, targets in _import_graph().items():
        room = max((r for r in MAY_IMPORT if module == r or module.startswith(r + ".")),
                   key=len)
        wrong += [f"{module} -> {t}" for t in sorted(targets)
                  if t.split(".")[0] not in MAY_IMPORT[room]]
    assert not wrong, f"imports against the map of the house: {wrong}"


# -- size rule -----------------------------------------------------------------------------

MAX_MODULE_LINES = 400
MAX_FUNCTION_LINES = 60

# Today's offenders, each with the issue point that removes it. The list only shrinks: an
# entry that is back under the limit (or gone) fails the test until it is removed here.
OVERSIZE_MODULES: dict[str, str] = {
}
OVERSIZE_FUNCTIONS: dict[str, str] = {
}


@functools.cache
def _oversize() -> tuple[set[str], set[str]]:
    modules, functions = set(), set()
    for path in sorted(p for folder in SOURCE_ROOTS.values()
                       for p in (ROOT / folder).rglob("*.py")):
        name = path.relative_to(ROOT).as_posix()
        text = path.read_text()
        if len(text.splitlines()) > MAX_MODULE_LINES:
            modules.add(name)
        for node in ast.walk(ast.parse(text)):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)) \
                    and node.end_lineno - node.lineno + 1 > MAX_FUNCTION_LINES:
                functions.add(f"{name}::{node.name}")
    return modules, functions


def test_modules_and_functions_stay_small():
    modules, functions = _oversize()
    big_modules = sorted(modules - OVERSIZE_MODULES.keys())
    assert not big_modules, f"modules over {MAX_MODULE_LINES} lines: split {big_modules}"
    big_functions = sorted(functions - OVERSIZE_FUNCTIONS.keys())
    assert not big_functions, f"functions over {MAX_FUNCTION_LINES} lines: {big_functions}"


def test_size_allow_list_only_shrinks():
    modules, functions = _oversize()
    stale = sorted((OVERSIZE_MODULES.keys() - modules) | (OVERSIZE_FUNCTIONS.keys() - functions))
    assert not stale, f"now within the size rule: remove from the allow-list: {stale}"


# -- the map of the house (DEVELOPERS.md) ------------------------------------------------

# Lowest first; a module may import its own layer and those before it. The longest
# matching prefix places a module.
LAYERS: list[tuple[str, ...]] = [
    ("sweepd_configs",),
    ("drivers",),
    ("simulators",),
    ("acquire.errors", "acquire.units", "acquire.utc", "acquire.jsonclean", "acquire.safejson",
     "acquire.storage", "acquire.sweep", "acquire.yamlfile", "acquire.library",
     "acquire.check_nodes", "acquire.plaintext"),
    ("acquire.metrics", "acquire.touchstone"),
    ("acquire.calibration", "acquire.uncertainty"),
    ("acquire.masks", "acquire.mask_results", "acquire.checks", "acquire.verdict",
     "acquire.twoport_checks", "acquire.timedomain", "acquire.check_parse", "acquire.plots",
     "acquire.plotting", "acquire.tracecsv"),
    ("acquire.plan",),
    ("acquire.journal", "acquire.soak.spool", "acquire.soak.ownership", "acquire.holders"),
    ("acquire.capture",),
    ("acquire.guided", "acquire.station", "acquire.soak", "acquire.instruments",
     "acquire.service"),
    ("acquire.demo", "acquire.commands", "acquire.cli", "acquire"),
]


def _layer(module: str) -> int:
    best: tuple[int, str] | None = None
    for index, prefixes in enumerate(LAYERS):
        for prefix in prefixes:
            if (module == prefix or module.startswith(prefix + ".")) and \
                    (best is None or len(prefix) > len(best[1])):
                best = (index, prefix)
    if best is None or (best[1] == "acquire" and module != "acquire"):
        raise AssertionError(f"{module} is not on the map of the house: add it to LAYERS "
                             "here and to DEVELOPERS.md")
    return best[0]


def test_imports_go_down_the_map_of_the_house():
    upward = [f"{module} -> {target}" for module, targets in _import_graph().items()
              for target in sorted(targets) if _layer(target) > _layer(module)]
    assert not upward, f"imports against the map of the house (DEVELOPERS.md): {upward}"

