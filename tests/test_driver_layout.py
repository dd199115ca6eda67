"""The drivers package stays in small rooms with imports going one way.

Module-level and function-level imports between ``drivers`` modules form no cycle (issue:
import cycles hidden by function-level imports), drivers never import ``acquire``, and no
drivers module grows past about 400 lines (common practice for this project, DEVELOPERS.md).
"""

from __future__ import annotations

import ast
from pathlib import Path

DRIVERS = Path(__file__).resolve().parents[1] / "drivers"
MAX_LINES = 420
MAX_FUNCTION_LINES = 60
BEING_SPLIT = {"transport.py"}  # reworked on the LAN branch (HiSLIP, fallback path, I/O log)


def _imports(path: Path) -> set[str]:
    """Every ``drivers.x`` or ``acquire...`` module imported anywhere in ``path``."""
    found: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.ImportFrom) and node.module == "drivers":
            found.update(f"drivers.{alias.name}" for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            found.add(node.module)
        elif isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names)
    return {name for name in found if name.startswith(("drivers.", "acquire"))}


def _graph() -> dict[str, set[str]]:
    return {f"drivers.{p.stem}": _imports(p) for p in DRIVERS.glob("*.py")}


def find_cycle(graph: dict[str, set[str]]) -> list[str] | None:
    """One import cycle in ``graph`` as a list of modules, or None."""
    state: dict[str, int] = {}

    def visit(name: str, trail: list[str]) -> list[str] | None:
        state[name] = 1
        for dep in sorted(graph.get(name, ())):
            if dep not in graph:
                continue
            if state.get(dep) == 1:
                return [*trail, name, dep]
            if dep not in state:
                found = visit(dep, [*trail, name])
                if found:
                    return found
        state[name] = 2
        return None

    for module in sorted(graph):
        if module not in state:
            found = visit(module, [])
            if found:
                return found
    return None


def test_no_import_cycle_among_drivers_modules() -> None:
    assert find_cycle(_graph()) is None


def test_cycle_check_sees_a_cycle() -> None:
    # The checker itself must be able to fail: the old dialect <-> dialect_parse shape.
    graph = {"drivers.dialect": {"drivers.dialect_parse"},
             "drivers.dialect_parse": {"drivers.dialect", "drivers.templates"},
             "drivers.templates": set()}
    assert find_cycle(graph) == ["drivers.dialect", "drivers.dialect_parse", "drivers.dialect"]


def test_drivers_never_import_acquire() -> None:
    offenders = {m: sorted(d for d in deps if d.startswith("acquire"))
                 for m, deps in _graph().items()}
    assert {m: d for m, d in offenders.items() if d} == {}


def test_drivers_modules_stay_small() -> None:
    sizes = {p.name: len(p.read_text().splitlines()) for p in DRIVERS.glob("*.py")
             if p.name not in BEING_SPLIT}
    assert {n: s for n, s in sizes.items() if s > MAX_LINES} == {}


def test_drivers_functions_stay_short() -> None:
    long = {}
    for path in DRIVERS.glob("*.py"):
        if path.name in BEING_SPLIT:
            continue
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                length = (node.end_lineno or node.lineno) - node.lineno + 1
                if length > MAX_FUNCTION_LINES:
                    long[f"{path.name}:{node.name}"] = length
    assert long == {}
