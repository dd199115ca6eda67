"""Read one YAML document safely and within bounds, with one-line errors naming the file.

The lowest layer has it so that dialect files here and plans, masks and kits in
``acquire`` are read and reported the same way. Limits (see README "Limits and
guarantees"):

- at most ``MAX_BYTES`` of text;
- at most ``MAX_DEPTH`` levels of nesting;
- aliases (``*name``) may add at most ``MAX_ALIAS_EXPANSION`` values to the document
  once expanded, and may not refer to themselves: a few hundred bytes of nested aliases
  would otherwise expand to billions of values for any code that walks them.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

MAX_BYTES = 4 * 1024 * 1024
MAX_DEPTH = 64
MAX_ALIAS_EXPANSION = 10_000


class _Refused(Exception):
    """The document is well-formed YAML but beyond a limit."""


def load_yaml_file(path: Path, source: str, error: type[Exception]) -> Any:
    """Bounded ``yaml.safe_load`` of ``path``; failures raise ``error("<source>: ...")``."""
    text = _read_text(path, source, error)
    return load_yaml_text(text, source, error)


def load_yaml_text(text: str, source: str, error: type[Exception]) -> Any:
    """Bounded ``yaml.safe_load`` of ``text`` (``source`` names it in messages)."""
    import yaml

    loader = None
    try:
        loader = yaml.SafeLoader(text)  # its reader refuses control characters here
        node = loader.get_single_node()
        if node is None:
            return None
        _check_size(node)
        return loader.construct_document(node)
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark
        where = f"line {mark.line + 1}, column {mark.column + 1}: " if mark else ""
        raise error(_one_line(f"{source}: {where}YAML syntax error: {exc.problem}")) from None
    except yaml.YAMLError as exc:
        raise error(_one_line(f"{source}: YAML error: {exc}")) from None
    except _Refused as exc:
        raise error(f"{source}: {exc}") from None
    except RecursionError:
        raise error(f"{source}: nested too deeply (at most {MAX_DEPTH} levels)") from None
    except ValueError as exc:  # an integer beyond Python's digit limit, a bad date
        raise error(_one_line(f"{source}: value out of range: {str(exc)[:80]}")) from None
    finally:
        if loader is not None:
            loader.dispose()


def _read_text(path: Path, source: str, error: type[Exception]) -> str:
    try:
        with open(path, "rb") as handle:
            data = handle.read(MAX_BYTES + 1)
    except FileNotFoundError:
        raise error(f"{source}: file not found") from None
    except IsADirectoryError:
        raise error(f"{source}: is a folder, not a file") from None
    except OSError as exc:
        raise error(f"{source}: cannot read ({exc.strerror})") from None
    if len(data) > MAX_BYTES:
        raise error(f"{source}: larger than {MAX_BYTES // (1024 * 1024)} MiB; not a config file")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise error(f"{source}: not UTF-8 text (byte {exc.start})") from None


def _check_size(root: Any) -> None:
    """Refuse deep nesting, self-referring aliases and aliases that expand too far."""
    from yaml.nodes import MappingNode, SequenceNode

    sizes: dict[int, int] = {}  # id(node) -> values under it, aliases expanded
    open_nodes: set[int] = set()
    distinct = 0

    def walk(node: Any, depth: int) -> int:
        nonlocal distinct
        key = id(node)
        if key in sizes:
            return sizes[key]
        if key in open_nodes:
            raise _Refused("an alias refers to the value that contains it")
        if depth > MAX_DEPTH:
            raise _Refused(f"nested too deeply (at most {MAX_DEPTH} levels)")
        distinct += 1
        total = 1
        if isinstance(node, (SequenceNode, MappingNode)):
            open_nodes.add(key)
            children = node.value if isinstance(node, SequenceNode) else \
                [part for pair in node.value for part in pair]
            for child in children:
                total += walk(child, depth + 1)
                if total - distinct > MAX_ALIAS_EXPANSION:
                    raise _Refused(f"aliases expand to more than {MAX_ALIAS_EXPANSION} "
                                   "extra values; write the values out instead")
            open_nodes.discard(key)
        sizes[key] = total
        return total

    walk(root, 0)


def _one_line(text: str) -> str:
    text = " ".join(text.split())
    return text if len(text) <= 300 else text[:297] + "..."
