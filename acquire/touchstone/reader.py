"""Read Touchstone 1.0, 1.1, 2.0 and 2.1 files.

Rules follow the Touchstone File Format Specification 2.0 (IBIS Open Forum, 2009) and
2.1 (which names 1.1 and makes ``[End]`` required). Lenient mode (the default) accepts
what the specification calls defects but readers meet in practice — no option line,
bytes above 0x7E in comments, a second option line, unknown keywords — and records a
note in ``TouchstoneFile.warnings``; ``strict=True`` turns every such note into an
error. Anything that would make the numbers wrong is always an error naming the line.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np

from acquire.errors import TouchstoneError
from drivers.yamlnode import show

from .comments import comment_text, split_meta
from .convert import normalisation
from .datasets import NOISE_NUMBERS, DataSets, SectionError, read_section
from .header import OptionLine, parse_option_line, split_keyword
from .keywords import HeaderError, Keywords, display, read_keywords
from .limits import MAX_FILE_BYTES, ports_problem
from .matrices import network_matrices, noise_data
from .model import NoiseData, TouchstoneFile

_EXTENSION = re.compile(r"\.[szyhg](\d+)p\Z", re.IGNORECASE)
_UNSAFE = re.compile(rb"[^\t\n\x20-\x7e]")
_PRINTABLE = bytes(range(0x20, 0x7F)) + b"\t\n"
_MAX_WARNINGS = 20


def ports_from_name(name: str) -> int | None:
    """Port count from a ``.sNp`` (or ``.yNp``, ``.zNp``...) extension, else None."""
    match = _EXTENSION.search(name)
    return int(match.group(1)) if match and int(match.group(1)) > 0 else None


def read_touchstone(path: Path | str, *, strict: bool = False) -> TouchstoneFile:
    """Read a file; version 1 port counts come from the ``.sNp`` extension."""
    path = Path(path)
    try:
        with open(path, "rb") as handle:
            data = handle.read(MAX_FILE_BYTES + 1)
    except OSError as exc:
        raise TouchstoneError(f"touchstone {path}: cannot read ({exc.strerror or exc})") from None
    if len(data) > MAX_FILE_BYTES:
        raise TouchstoneError(f"touchstone {path}: larger than {MAX_FILE_BYTES >> 20} MiB, "
                              "the most sweepd reads")
    return _Parser(data, str(path), ports_from_name(path.name), strict, True).parse()


def parse_touchstone(text: str, *, name: str = "<text>", ports: int | None = None,
                     strict: bool = False) -> TouchstoneFile:
    """Parse Touchstone text; ``ports`` is needed for version 1 unless inferable."""
    data = text.encode("utf-8", "surrogatepass")
    return _Parser(data, name, ports, strict, False).parse()


class _Parser:
    def __init__(self, data: bytes, name: str, ports: int | None, strict: bool,
                 from_file: bool) -> None:
        self.name, self.ports, self.strict, self.from_file = name, ports, strict, from_file
        problem = ports_problem(ports) if ports is not None else None
        if problem:
            raise self.error(0, f"{problem} (from the file name)")
        if b"\r" in data:
            data = data.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
        self.data = data
        self.warnings: list[str] = []
        self.comments: list[str] = []
        self.option = OptionLine()

    # -- messages -------------------------------------------------------------------

    def error(self, line: int, message: str) -> TouchstoneError:
        where = f"touchstone {self.name}: line {line}: " if line else f"touchstone {self.name}: "
        return TouchstoneError(where + message)

    def note(self, line: int, message: str) -> None:
        """A lenient-mode warning; an error in strict mode."""
        if self.strict:
            raise self.error(line, message + " (strict mode)")
        if len(self.warnings) < _MAX_WARNINGS:
            self.warnings.append(f"line {line}: {message}" if line else message)

    # -- top level ------------------------------------------------------------------

    def parse(self) -> TouchstoneFile:
        self._check_bytes()
        lines = self._header_lines()
        first = next(((no, text) for no, text, _ in lines if text), None)
        if first is None:
            raise self.error(0, "no option line and no data (empty file?)")
        if first[1].startswith("["):
            return self._parse_v2(lines)
        return self._parse_v1(lines)

    def _check_bytes(self) -> None:
        data = self.data
        if not data.translate(None, _PRINTABLE):
            return
        for match in _UNSAFE.finditer(data):
            pos = match.start()
            line_start = data.rfind(b"\n", 0, pos) + 1
            line = data.count(b"\n", 0, pos) + 1
            what = f"byte 0x{data[pos]:02x}"
            if b"!" not in data[line_start:pos]:
                raise self.error(line, f"{what} is not allowed outside comments "
                                       "(Touchstone files are printable ASCII)")
            self.note(line, f"{what} in a comment (only printable ASCII is allowed); "
                            "read as '?'")
        self.data = _UNSAFE.sub(b"?", data)

    def _header_lines(self) -> list[tuple[int, str, str | None]]:
        """(line number, content, comment) for each line up to where the data begin.

        Version 1 data begin at the first line that is neither blank, comment, option
        line nor keyword; version 2 data after ``[Network Data]``.
        """
        out: list[tuple[int, str, str | None]] = []
        data, pos, no = self.data, 0, 0
        self._line_starts = [0]
        version2: bool | None = None
        while pos < len(data):
            end = data.find(b"\n", pos)
            end = len(data) if end < 0 else end
            no += 1
            content, bang, comment = data[pos:end].decode("ascii").partition("!")
            content = content.strip()
            out.append((no, content, comment_text(comment) if bang else None))
            pos = end + 1
            self._line_starts.append(pos)
            if not content:
                continue
            if version2 is None:
                version2 = content.startswith("[")
            if version2:
                parts = split_keyword(content)
                if parts and parts[0] == "network data":
                    break
            elif not content.startswith(("#", "[")):
                break
        return out

    def _offset_of_line(self, line: int) -> int:
        """Byte offset where 1-based ``line`` starts (line must be in the header)."""
        return self._line_starts[min(line - 1, len(self._line_starts) - 1)]

    def _find_keyword(self, start: int) -> int:
        """Offset of the next line (at or after ``start``) that begins with ``[``."""
        data = self.data
        pos = start
        while True:
            idx = data.find(b"[", pos)
            if idx < 0:
                return len(data)
            line_start = max(data.rfind(b"\n", 0, idx) + 1, start)
            if not data[line_start:idx].strip():
                return line_start
            pos = idx + 1

    def _collect_comments(self, lines) -> None:
        for _, _, comment in lines:
            if comment is not None:
                self.comments.append(comment)

    def _set_option(self, no: int, text: str) -> None:
        if self.option.line:
            self.note(no, f"second option line ignored (the first is on line {self.option.line})")
            return
        try:
            self.option = parse_option_line(text[1:], no)
        except ValueError as exc:
            raise self.error(no, str(exc)) from None

    # -- version 1 ------------------------------------------------------------------

    def _parse_v1(self, lines) -> TouchstoneFile:
        data_line = 0
        for no, text, _ in lines:
            if text.startswith("#"):
                self._set_option(no, text)
            elif text.startswith("["):
                raise self.error(no, f"keyword {text.split(']')[0]}] in a version 1 file "
                                     "(a version 2 file starts with [Version], before the "
                                     "option line)")
            elif text:
                data_line = no
        self._collect_comments(lines[:-1] if data_line else lines)
        if not data_line:
            raise self.error(0, "no network data")
        if not self.option.line:
            self.note(data_line, "no option line; using '# GHz S MA R 50'")
        start = self._offset_of_line(data_line)
        keyword = self._find_keyword(start)
        if keyword < len(self.data):
            line = self.data.count(b"\n", 0, keyword) + 1
            raise self.error(line, "keyword in a version 1 file "
                                   "(keywords need [Version] 2.0 on the first line)")
        ports = self.ports or self._infer_ports(start, data_line)
        self._check_parameter(ports)
        resistance = self.option.resistance
        if len(resistance) not in (1, ports):
            raise self.error(self.option.line,
                             f"option line gives {len(resistance)} reference resistances "
                             f"for {ports} ports (give 1 or {ports})")
        sets = self._section(start, len(self.data), data_line, 1 + 2 * ports * ports,
                             split_noise=ports == 2)
        version = "1.1" if len(resistance) > 1 else "1.0"
        z0 = tuple(np.broadcast_to(np.array(resistance), (ports,)).tolist())
        matrix = network_matrices(sets.values, ports, self.option.fmt,
                                  column_major=ports == 2, matrix="full")
        if self.option.parameter != "S":
            matrix = matrix / normalisation(self.option.parameter, z0, ports)
        noise = None
        if sets.noise is not None:
            noise = noise_data(sets.noise, rn_scale=z0[0])
        return self._result(sets, matrix, z0, version, noise, ())

    def _infer_ports(self, start: int, data_line: int) -> int:
        """Port count from the numbers in the first data set (odd/even line rule)."""
        count, pos, lines = 0, start, 0
        while pos < len(self.data):
            end = self.data.find(b"\n", pos)
            end = len(self.data) if end < 0 else end
            found = len(self.data[pos:end].split(b"!")[0].split())
            pos = end + 1
            if not found:
                continue
            if lines and found % 2:
                break
            count, lines = count + found, lines + 1
        ports = math.isqrt(max(count - 1, 0) // 2)
        if ports_problem(ports):
            raise self.error(data_line, f"the first data set holds {count} numbers; "
                                        f"{ports_problem(ports)}")
        if count % 2 == 0 or 1 + 2 * ports * ports != count or ports == 0:
            raise self.error(data_line, f"cannot tell the port count: the first data set holds "
                                        f"{count} numbers (name the file .sNp)")
        self.note(data_line, f"port count {ports} inferred from the data "
                             f"(name the file .s{ports}p)")
        return ports

    # -- version 2 ------------------------------------------------------------------

    def _parse_v2(self, lines) -> TouchstoneFile:
        try:
            kw = read_keywords(lines, self.ports)
        except HeaderError as exc:
            raise self.error(exc.line, exc.message) from None
        for no, text in kw.option_lines:
            self._set_option(no, text)
        for no, message in kw.notes:
            self.note(no, message)
        self._collect_comments(lines)
        return self._v2_body(kw, lines[-1][0])

    def _v2_body(self, kw: Keywords, network_line: int) -> TouchstoneFile:
        assert kw.ports is not None
        ports = kw.ports
        self._check_parameter(ports)
        if not self.option.line:
            self.note(0, "no option line; using '# GHz S MA R 50'")
        if ports == 2 and kw.order is None:
            raise self.error(kw.lines["network data"],
                             "a 2-port version 2 file needs [Two-Port Data Order] 12_21 or 21_12")
        if kw.frequencies is None:
            self.note(network_line, "[Number of Frequencies] is missing")
        if len(self.option.resistance) not in (1, ports):
            raise self.error(self.option.line, f"option line gives {len(self.option.resistance)} "
                                               f"reference resistances for {ports} ports")
        z0 = tuple(kw.reference) if kw.reference else tuple(
            np.broadcast_to(np.array(self.option.resistance), (ports,)).tolist())
        pairs = ports * ports if kw.matrix == "full" else ports * (ports + 1) // 2
        start = self._offset_of_line(network_line + 1)
        end, end_line = self._next_keyword(start)
        sets = self._section(start, end, network_line + 1, 1 + 2 * pairs)
        if kw.frequencies is not None and kw.frequencies != len(sets.values):
            raise self.error(kw.lines["number of frequencies"],
                             f"[Number of Frequencies] is {kw.frequencies} but [Network Data] "
                             f"holds {len(sets.values)} data sets")
        noise = None
        keyword = self._keyword_at(end, end_line)
        if keyword == "noise data":
            noise, end, end_line = self._v2_noise(kw, end, end_line)
            keyword = self._keyword_at(end, end_line)
        elif kw.noise_frequencies is not None:
            self.note(kw.lines["number of noise frequencies"],
                      "[Number of Noise Frequencies] given but there is no [Noise Data]")
        if keyword != "end":
            if keyword is None:
                raise self.error(0, "missing [End] at the end of the file (required as the "
                                    "last keyword)")
            raise self.error(end_line, f"expected [End] or [Noise Data], found {display(keyword)}")
        self._after_end(end)
        column_major = ports == 2 and kw.order == "21_12"
        matrix = network_matrices(sets.values, ports, self.option.fmt,
                                  column_major=column_major, matrix=kw.matrix)
        return self._result(sets, matrix, z0, kw.version, noise, kw.mixed)

    def _v2_noise(self, kw: Keywords, at: int, line: int) -> tuple[NoiseData, int, int]:
        """The [Noise Data] block starting at offset ``at`` (line ``line``)."""
        if kw.ports != 2:
            raise self.error(line, f"[Noise Data] is only allowed in 2-port files "
                                   f"(this one has {kw.ports} ports)")
        stop = self.data.find(b"\n", at)
        start = len(self.data) if stop < 0 else stop + 1
        end, end_line = self._next_keyword(start)
        sets = self._section(start, end, line + 1, NOISE_NUMBERS, what="noise line")
        if not len(sets.values):
            raise self.error(line, "[Noise Data] holds no noise lines")
        declared = kw.noise_frequencies
        if declared is None:
            self.note(line, "[Number of Noise Frequencies] is missing")
        elif declared != len(sets.values):
            raise self.error(kw.lines["number of noise frequencies"],
                             f"[Number of Noise Frequencies] is {declared} but [Noise Data] "
                             f"holds {len(sets.values)} lines")
        return noise_data(sets.values, rn_scale=1.0), end, end_line

    def _next_keyword(self, start: int) -> tuple[int, int]:
        """Offset and 1-based line of the next keyword line at or after ``start``."""
        end = self._find_keyword(start)
        return end, self.data.count(b"\n", 0, end) + 1

    def _keyword_at(self, offset: int, line: int) -> str | None:
        if offset >= len(self.data):
            return None
        stop = self.data.find(b"\n", offset)
        text = self.data[offset:stop if stop >= 0 else None].decode("ascii")
        parts = split_keyword(text.partition("!")[0].strip())
        if parts is None:
            raise self.error(line, f"malformed keyword line {show(text.strip())}")
        if parts[1]:
            raise self.error(line, f"{display(parts[0])} takes no argument, found {show(parts[1])}")
        return parts[0]

    def _after_end(self, end: int) -> None:
        stop = self.data.find(b"\n", end)
        if stop < 0:
            return
        rest = self.data[stop + 1:]
        for k, raw in enumerate(rest.split(b"\n")):
            content, bang, comment = raw.decode("ascii").partition("!")
            if bang:
                self.comments.append(comment_text(comment))
            if content.strip():
                line = self.data.count(b"\n", 0, stop + 1) + k + 1
                self.note(line, "text after [End] ignored")

    # -- shared ---------------------------------------------------------------------

    def _section(self, start: int, end: int, first_line: int, per_set: int, *,
                 split_noise: bool = False, what: str = "data set") -> DataSets:
        try:
            sets = read_section(self.data, start, end, first_line, per_set,
                                self.option.unit_exp, split_noise=split_noise, what=what)
        except SectionError as exc:
            raise self.error(exc.line, exc.message) from None
        for line in sets.option_lines:
            if not self.option.line:
                raise self.error(line, "option line after the data (it must come first)")
            self.note(line, f"second option line ignored (the first is on line {self.option.line})")
        self.comments.extend(comment_text(c) for c in sets.comments)
        if what == "data set" and not len(sets.values):
            raise self.error(first_line, "no network data")
        return sets

    def _check_parameter(self, ports: int) -> None:
        if self.option.parameter in ("H", "G") and ports != 2:
            raise self.error(self.option.line, f"{self.option.parameter} parameters need a "
                                               f"2-port file, this one has {ports} ports")

    def _result(self, sets: DataSets, matrix: np.ndarray, z0: tuple[float, ...], version: str,
                noise: NoiseData | None, mixed: tuple[str, ...]) -> TouchstoneFile:
        meta, comments = split_meta(self.comments)
        return TouchstoneFile(
            freq_hz=sets.values[:, 0], data=matrix, parameter=self.option.parameter, z0=z0,
            version=version, fmt=self.option.fmt, comments=tuple(comments), meta=meta,
            noise=noise, warnings=tuple(self.warnings), mixed_mode=mixed, name=self.name)

