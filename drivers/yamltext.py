"""Read one YAML document safely, with one-line errors naming the file (and line).

The lowest layer has it so that dialect files here and plans, masks and kits in
``acquire`` are read and reported the same way.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any


def load_yaml_file(path: Path, source: str, error: type[Exception]) -> Any:
    """``yaml.safe_load`` of ``path``; failures raise ``error("<source>: ...")``."""
    import yaml

    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise error(f"{source}: file not found") from None
    except UnicodeDecodeError as exc:
        raise error(f"{source}: not UTF-8 text (byte {exc.start})") from None
    except OSError as exc:
        raise error(f"{source}: cannot read ({exc.strerror})") from None
    try:
        return yaml.safe_load(text)
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark
        where = f"line {mark.line + 1}, column {mark.column + 1}: " if mark else ""
        raise error(f"{source}: {where}YAML syntax error: {exc.problem}") from None
    except yaml.YAMLError as exc:
        raise error(f"{source}: YAML error: {' '.join(str(exc).split())}") from None
