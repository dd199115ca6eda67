"""The subcommands of ``sweepd`` (one module each; see ``acquire.cli``)."""

from __future__ import annotations

from pathlib import Path


def cli_path(text: str) -> Path:
    """A path given on the command line: taken from the working folder and made absolute,
    so that the files, JSON and journal rows naming it mean the same from any folder."""
    return Path(text).expanduser().absolute()
