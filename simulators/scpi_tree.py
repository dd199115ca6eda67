"""A SCPI command tree declared as patterns, and header resolution with the SCPI path rules.

Pattern syntax (SCPI-1999 Vol. 1 notation): ``"[:SENSe#]:FREQuency:STARt"``. Upper-case
letters form the short form, the whole word the long form; only those two exact forms
match, case-insensitively (``FREQU`` is rejected). ``[...]`` marks an optional node, ``#``
a numeric suffix (``#`` = 1 only, ``#4`` = 1..4; omitted means 1), ``A|B`` alternative
mnemonics. Common commands are registered as ``"*IDN"``.

Path rules (SCPI-1999 Vol. 1 §6.2): a header with a leading ``:`` starts at the root;
otherwise it continues from the current path, which after each unit is the level of the
last node the header spelled out (``FREQ:STAR 1;STOP 2`` is ``FREQ:STOP 2``); the
terminator resets the path; common commands leave it alone. Resolutions are cached per
(path, header).
"""

from __future__ import annotations

import itertools
import re
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from simulators.scpi_errors import ScpiError

_TOKEN = re.compile(r"^([A-Z][A-Z0-9_]*?)(\d*)$")
# a program header without its query mark (the caller strips one '?'; a second is an error)
_HEADER = re.compile(r"^:?[A-Za-z][A-Za-z0-9_]*(?::[A-Za-z][A-Za-z0-9_]*)*$")
_COMMON = re.compile(r"^\*[A-Za-z]+\??$")
_NODE = re.compile(r"^([A-Z]+)([a-z]*)(#(\d*))?$")
MAX_MNEMONIC = 12

Path = tuple[tuple[str, int], ...]
Handler = Callable[..., Any]


@dataclass(frozen=True)
class Node:
    """One mnemonic of a pattern."""

    long: str
    short: str
    optional: bool
    max_suffix: int  # 0: no suffix allowed

    @property
    def key(self) -> str:
        return self.long


@dataclass
class Command:
    """A resolved leaf: the handlers for the set form and the query form."""

    pattern: str
    nodes: tuple[Node, ...]
    set: Handler | None = None
    query: Handler | None = None


@dataclass(frozen=True)
class Resolution:
    command: Command
    suffixes: dict[str, int]
    path: Path


@dataclass
class CommandTree:
    """Patterns → handlers, with cached header resolution."""

    commands: list[Command] = field(default_factory=list)
    common: dict[str, Command] = field(default_factory=dict)
    _cache: dict[tuple[Path, str], Resolution | ScpiError] = field(default_factory=dict)

    def add(self, pattern: str, set: Handler | None = None, query: Handler | None = None) -> None:
        """Register a pattern; either handler may be absent (query-only, command-only)."""
        if pattern.startswith("*"):
            self.common[pattern.upper()] = Command(pattern, (), set, query)
            return
        for nodes in _expand(pattern):
            self.commands.append(Command(pattern, nodes, set, query))
        self._cache.clear()

    def resolve_common(self, header: str) -> Command:
        name = header.rstrip("?").upper()
        if not _COMMON.match(header):
            raise ScpiError(-102, header)
        command = self.common.get(name)
        if command is None:
            raise ScpiError(-113, header)
        return command

    def resolve(self, header: str, path: Path) -> Resolution:
        """Resolve a (non-common) header, without its ``?``, against the current path."""
        key = (path, header)
        hit = self._cache.get(key)
        if hit is None:
            try:
                hit = self._resolve(header, path)
            except ScpiError as exc:
                hit = exc
            if len(self._cache) > 4096:
                self._cache.clear()
            self._cache[key] = hit
        if isinstance(hit, ScpiError):
            raise ScpiError(hit.code, hit.detail)
        return hit

    def _resolve(self, header: str, path: Path) -> Resolution:
        if not _HEADER.match(header):
            bad = next((c for c in header if not (c.isalnum() or c in ":_?")), None)
            raise ScpiError(-101 if bad is not None else -102, header)
        absolute = header.startswith(":")
        tokens = []
        for text in header.lstrip(":").split(":"):
            match = _TOKEN.match(text.upper())
            assert match is not None  # guaranteed by _HEADER
            name, suffix = match.group(1), match.group(2)
            if len(name) > MAX_MNEMONIC:
                raise ScpiError(-112, text)
            tokens.append((name, int(suffix) if suffix else None))
        if absolute:
            path = ()
        suffix_problem = False
        for command in self.commands:
            nodes = command.nodes
            if len(nodes) < len(path) or any(
                    n.key != p[0] for n, p in zip(nodes[: len(path)], path, strict=True)):
                continue
            result = _match(nodes, len(path), tokens, 0)
            if result is None:
                continue
            if result == "suffix":
                suffix_problem = True
                continue
            matched, last_given = result
            resolved = list(path) + matched
            suffixes = dict(resolved)
            return Resolution(command, suffixes, tuple(resolved[: len(path) + last_given]))
        raise ScpiError(-114 if suffix_problem else -113, header)


def _match(nodes: tuple[Node, ...], i: int, tokens: list, j: int):
    """Match tokens[j:] against nodes[i:]; optional nodes may be skipped.

    Returns (resolved [(key, suffix)], index in it of the last spelled-out node or -1),
    "suffix" when only a numeric suffix was out of range, or None.
    """
    if j == len(tokens):
        if all(n.optional for n in nodes[i:]):
            return [(n.key, 1) for n in nodes[i:]], -1
        return None
    if i == len(nodes):
        return None
    node = nodes[i]
    name, suffix = tokens[j]
    outcome = None
    if name in (node.long, node.short):
        if suffix is not None and (node.max_suffix == 0 or not 1 <= suffix <= node.max_suffix):
            outcome = "suffix" if node.max_suffix else None
        else:
            rest = _match(nodes, i + 1, tokens, j + 1)
            if isinstance(rest, tuple):
                matched, last = rest
                return [(node.key, suffix or 1), *matched], last + 1 if last >= 0 else 0
            outcome = rest
    if node.optional:
        rest = _match(nodes, i + 1, tokens, j)
        if isinstance(rest, tuple):
            matched, last = rest
            return [(node.key, 1), *matched], last + 1 if last >= 0 else -1
        outcome = outcome or rest
    return outcome


def _expand(pattern: str) -> list[tuple[Node, ...]]:
    """Split a pattern into nodes; alternatives expand into several node tuples."""
    parts = re.findall(r"\[:?([^\]]+)\]|:?([^:\[\]]+)", pattern)
    choices: list[list[Node]] = []
    for optional_part, plain_part in parts:
        text = optional_part or plain_part
        options = []
        for alt in text.split("|"):
            match = _NODE.match(alt)
            if not match:
                raise ValueError(f"bad pattern node {alt!r} in {pattern!r}")
            upper, lower, has_suffix, max_text = match.groups()
            max_suffix = (int(max_text) if max_text else 1) if has_suffix else 0
            options.append(Node((upper + lower).upper(), upper, bool(optional_part), max_suffix))
        choices.append(options)
    return [tuple(combo) for combo in itertools.product(*choices)]
