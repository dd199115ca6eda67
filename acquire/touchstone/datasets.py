"""Split a Touchstone data section into data sets (and version 1 noise lines).

A data set is a frequency followed by value pairs. Pairs are never split across lines,
so a line holding an odd count of numbers starts a data set and an even count continues
one; that is how the count per set is checked (Touchstone File Format Specification
2.0, network data rules; the reference checkers use the same rule). In a version 1
2-port file the noise parameters follow the network data and begin where the frequency
stops increasing (same specification, noise parameter rules).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np

from .limits import MAX_FREQUENCIES, MAX_NUMBERS, count_numbers
from .numparse import (
    NumberError,
    check_charset,
    float_shifted,
    parse_records,
    parse_tokens,
    tokens_with_lines,
)

_COMMENT = re.compile(rb"!([^\n]*)")
_OPTION = re.compile(rb"(?m)^[ \t]*#[^\n]*")
NOISE_NUMBERS = 5


class SectionError(ValueError):
    """A defect in a data section; ``line`` is the 1-based line in the file."""

    def __init__(self, line: int, message: str) -> None:
        super().__init__(message)
        self.line = line
        self.message = message


@dataclass
class DataSets:
    """Numbers of one section, frequencies already in Hz."""

    values: np.ndarray                       # (sets, numbers per set)
    lines: np.ndarray                        # first line of each set (1-based)
    noise: np.ndarray | None = None          # (points, 5), version 1 noise block
    noise_lines: np.ndarray | None = None
    comments: list[str] = field(default_factory=list)
    option_lines: list[int] = field(default_factory=list)   # later option lines, ignored


def read_section(data: bytes, start: int, end: int, first_line: int, per_set: int,
                 unit_exp: int, *, split_noise: bool = False, what: str = "data set") -> DataSets:
    """Parse ``data[start:end]`` (starting at 1-based ``first_line``) into sets of ``per_set``."""
    comments: list[str] = []
    options: list[int] = []
    if data.find(b"!", start, end) >= 0 or data.find(b"#", start, end) >= 0:
        section = data[start:end]
        if b"!" in section:
            comments = [c.decode("ascii") for c in _COMMENT.findall(section)]
            section = _COMMENT.sub(b"", section)
        if b"#" in section:
            options = [first_line + section.count(b"\n", 0, m.start())
                       for m in _OPTION.finditer(section)]
            section = _OPTION.sub(b"", section)
        data, start, end = section, 0, len(section)
    numbers = count_numbers(data, start, end)
    if numbers > MAX_NUMBERS:
        raise SectionError(first_line, f"{numbers:,} numbers: sweepd reads at most "
                                       f"{MAX_NUMBERS:,} in a file")
    shifts = np.zeros(per_set, dtype=np.int64)
    shifts[0] = unit_exp
    sets = _regular(data, start, end, first_line, per_set, shifts)
    if sets is None:
        section = data[start:end]
        try:
            check_charset(section)
        except NumberError as exc:
            raise SectionError(first_line + exc.line, exc.message) from None
        sets = _general(section, first_line, per_set, unit_exp, split_noise, what)
    if len(sets.values) > MAX_FREQUENCIES:
        raise SectionError(first_line, f"{len(sets.values):,} {what}s: sweepd reads at most "
                                       f"{MAX_FREQUENCIES:,} frequencies")
    sets.comments, sets.option_lines = comments, options
    _check_frequencies(sets.values[:, 0], sets.lines, what)
    if sets.noise is not None:
        _check_frequencies(sets.noise[:, 0], sets.noise_lines, "noise line")
    return sets


_NON_BLANK = re.compile(rb"[^ \t\n]")


def _regular(data: bytes, start: int, end: int, first_line: int, per_set: int,
             shifts: np.ndarray) -> DataSets | None:
    """Fast path: every set has the same byte layout as the first one."""
    first = _NON_BLANK.search(data, start, end)
    if first is None:
        return None
    line_start = data.rfind(b"\n", start, first.start()) + 1 or start
    skipped = data.count(b"\n", start, line_start)
    last = end
    while data[last - 1] in b" \t\n":
        last -= 1
    if last < len(data) and data[last] == 10:
        buffer, offset, length = data, line_start, last + 1 - line_start
    else:
        buffer, offset, length = data[line_start:last] + b"\n", 0, last + 1 - line_start
    count = lines_per_set = 0
    pos = offset
    while count < per_set:
        newline = buffer.find(b"\n", pos, offset + length)
        if newline < 0:
            return None
        found = len(buffer[pos:newline].split())
        if found % 2 != (1 if lines_per_set == 0 else 0):
            return None
        count, pos, lines_per_set = count + found, newline + 1, lines_per_set + 1
    if count != per_set:
        return None
    values = parse_records(buffer, offset, length, pos - offset, shifts)
    if values is None:
        return None
    lines = first_line + skipped + lines_per_set * np.arange(values.shape[0])
    return DataSets(values, lines)


def _general(section: bytes, first_line: int, per_set: int, unit_exp: int,
             split_noise: bool, what: str) -> DataSets:
    """Any layout: numbers in C, set boundaries from the odd/even rule."""
    tokens, tok_line = tokens_with_lines(section)
    try:
        values = parse_tokens(tokens, tok_line)
    except NumberError as exc:
        raise SectionError(first_line + exc.line, exc.message) from None
    if not tokens:
        return DataSets(np.zeros((0, per_set)), np.zeros(0, dtype=np.int64))
    # Per non-blank line: first token index, count, line number.
    first_tok = np.concatenate(([0], np.flatnonzero(np.diff(tok_line)) + 1))
    counts = np.diff(np.append(first_tok, len(tokens)))
    line_no = first_line + tok_line[first_tok]
    starts_set = counts % 2 == 1
    if not starts_set[0]:
        raise SectionError(int(line_no[0]),
                           f"expected {per_set} numbers per {what}, found {counts[0]} "
                           "(a set starts with its frequency, then whole pairs)")
    set_line = np.flatnonzero(starts_set)               # index into the line arrays
    set_tok = first_tok[set_line]
    sizes = np.diff(np.append(set_tok, len(tokens)))
    n_network = len(set_tok)
    if split_noise:
        drop = np.flatnonzero(np.diff(values[set_tok]) <= 0)
        if drop.size:
            n_network = int(drop[0]) + 1
    _check_sizes(sizes[:n_network], set_line[:n_network], counts, line_no, per_set, what)
    net_tok = set_tok[:n_network]
    table = values[net_tok[:, None] + np.arange(per_set)]
    if unit_exp:
        table[:, 0] = [float_shifted(tokens[t], unit_exp) for t in net_tok]
    sets = DataSets(table, line_no[set_line[:n_network]])
    if n_network < len(set_tok):
        noise_tok = set_tok[n_network:]
        noise_line = set_line[n_network:]
        wrong = np.flatnonzero(sizes[n_network:] != NOISE_NUMBERS)
        if wrong.size:
            k = int(wrong[0])
            first = k == 0
            raise SectionError(
                int(line_no[noise_line[k]]),
                f"expected {NOISE_NUMBERS} numbers per noise line, found {sizes[n_network + k]}"
                + (" (the frequency drops here, which starts the noise parameters of a "
                   "2-port file; network frequencies must increase strictly)" if first else ""))
        noise = values[noise_tok[:, None] + np.arange(NOISE_NUMBERS)]
        if unit_exp:
            noise[:, 0] = [float_shifted(tokens[t], unit_exp) for t in noise_tok]
        sets.noise, sets.noise_lines = noise, line_no[noise_line]
    return sets


def _check_sizes(sizes: np.ndarray, set_line: np.ndarray, counts: np.ndarray,
                 line_no: np.ndarray, per_set: int, what: str) -> None:
    bad = np.flatnonzero(sizes != per_set)
    if not bad.size:
        return
    k = int(bad[0])
    first = int(set_line[k])
    last = int(set_line[k + 1]) if k + 1 < len(set_line) else len(counts)
    if sizes[k] > per_set:
        running = np.cumsum(counts[first:last])
        over = int(np.argmax(running > per_set))
        if over and running[over - 1] == per_set:        # a stray even line after a full set
            raise SectionError(int(line_no[first + over]),
                               f"expected {per_set} numbers per {what}, "
                               f"found {counts[first + over]}")
    raise SectionError(int(line_no[first]),
                       f"expected {per_set} numbers per {what}, found {sizes[k]}"
                       + (f" over lines {line_no[first]}-{line_no[last - 1]}"
                          if last - first > 1 else ""))


def _check_frequencies(freq: np.ndarray, lines: np.ndarray, what: str) -> None:
    if freq.size and freq[0] < 0:
        raise SectionError(int(lines[0]), f"frequency {freq[0]:.12g} Hz is negative")
    step = np.diff(freq)
    bad = np.flatnonzero(step <= 0)
    if bad.size:
        k = int(bad[0]) + 1
        raise SectionError(int(lines[k]),
                           f"frequency {freq[k]:.12g} Hz is not above the previous {what}'s "
                           f"{freq[k - 1]:.12g} Hz (frequencies must increase strictly)")
