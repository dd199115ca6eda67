"""Who and what a run is recorded for, as given on the command line: the lot and the
operator. Checked before anything is measured, with a one-line error naming the option."""

from __future__ import annotations

import re

from acquire.errors import ConfigError
from drivers.yamlnode import show

LOT = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,63}")
OPERATOR_MAX = 64


def check_lot(text: str | None, option: str = "--lot") -> str | None:
    """A lot: 1-64 letters, digits, '.', '_' or '-', starting with a letter or digit (the
    rule of station ids, longer: lot numbers of a line run long). None stays None."""
    if text is None or LOT.fullmatch(text):
        return text
    raise ConfigError(f"{option} must be 1-64 letters, digits, '.', '_' or '-' (starting "
                      f"with a letter or digit), got {show(text)}")


def check_operator(text: str | None, option: str = "--operator") -> str | None:
    """An operator's name: 1-64 printable characters, not only blanks. None stays None."""
    if text is None or (0 < len(text) <= OPERATOR_MAX and text.isprintable()
                        and text.strip()):
        return text
    raise ConfigError(f"{option} must be 1-{OPERATOR_MAX} printable characters, got "
                      f"{show(text)}")
