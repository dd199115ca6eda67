"""Property-based fuzzing of every file kind sweepd reads (issue 10, "make it stay fixed").

Plans, masks, cal kits, dialects, cal sets, Touchstone files and spool job files are
built from valid ones with hostile values (NaN, infinities, integers of hundreds or
thousands of digits, huge strings, control characters, ``$`` markup, deep nesting, alias
bombs) and damage (truncation, flipped bytes). Each batch runs through the real command
line or loader in a subprocess (tests/fuzz_harness.py) under a memory cap
(``resource.RLIMIT_AS``) and a timeout. The property: every case ends in time, within
memory, and either succeeds or fails as a user error: exit 2 (or a verdict, 0/1, for
the commands that judge), exactly one line on stderr, never a traceback and never
"internal error".

The suite runs a small, derandomised batch per kind; ``--long`` runs many more.
"""

from __future__ import annotations

import copy
import io
import json
import os
import zipfile
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import yaml
from hostile_support import ROOT, run_limited
from hypothesis import HealthCheck, Phase, given, seed, settings
from hypothesis import strategies as st

from acquire.library import find_config

# A failing batch is large; its report names the failing case itself.
pytestmark = pytest.mark.filterwarnings("ignore::hypothesis.errors.HypothesisWarning")

MEMORY_MB = 1024
BATCH = 12


def _settings(long: bool):
    """Few examples from a fixed seed in the suite (the same cases every run, spread over
    the value pool rather than the simplest ones); many random ones with --long."""
    common = settings(max_examples=40 if long else 3, deadline=None,
                      suppress_health_check=list(HealthCheck), database=None,
                      phases=[Phase.explicit, Phase.generate])  # a failure names its case

    def apply(test):
        test = common(test)
        return test if long else seed(20261203)(test)
    return apply


# -- hostile values ----------------------------------------------------------------------

RAW = "@@RAW{}@@"  # placeholder in dumped YAML, replaced by raw text the dumper cannot write
RAW_TEXTS = ["9" * 5000, "-" + "9" * 400, "1e999", "*undefined_alias", "[" * 300 + "]" * 300,
             "{a: " * 200 + "1" + "}" * 200, "!!python/object:os.system 'true'",
             "2026-99-99", "0x" + "f" * 300, "!!binary AAAA", "&a [*a]"]
SCALARS = [float("nan"), float("inf"), float("-inf"), 10**400, -(10**400), 2**63, -1, 0,
           1e308, 5e-324, "", " ", "\n", "a\nb", "$\\frac{1}{$", "x" * 5000, None, True,
           "..", "../../etc/passwd", "\x1b[2J", "\u202eevil", "S99", "1e6", "nan",
           "10 parsec", "2.45 GHz", "-10 dBm", [], {}, [[[[]]]], {"a": {"b": {"c": {}}}}]


def hostile_value():
    raw = st.integers(0, len(RAW_TEXTS) - 1).map(lambda k: RAW.format(k))
    return st.one_of(st.sampled_from(SCALARS), raw,
                     st.lists(st.sampled_from(SCALARS[:12]), max_size=4))


def _paths(doc: Any, prefix: tuple = ()) -> list[tuple]:
    out = [prefix] if prefix else []
    if isinstance(doc, dict):
        for key, value in doc.items():
            out += _paths(value, (*prefix, key))
    elif isinstance(doc, list):
        for index, value in enumerate(doc):
            out += _paths(value, (*prefix, index))
    return out


def _set(doc: Any, path: tuple, value: Any) -> None:
    for key in path[:-1]:
        doc = doc[key]
    doc[path[-1]] = value


def _bomb() -> str:
    lines = ['z0: &z0 ["lol", "lol", "lol", "lol", "lol", "lol", "lol", "lol", "lol"]']
    lines += [f"z{k}: &z{k} [{', '.join([f'*z{k - 1}'] * 9)}]" for k in range(1, 9)]
    return "\n".join(lines) + "\n"


@st.composite
def yaml_text(draw, base: dict) -> str:
    """A valid document with hostile values set at 1-3 key paths, then maybe damaged."""
    doc = copy.deepcopy(base)
    paths = _paths(doc)
    for _ in range(draw(st.integers(1, 3))):
        path = draw(st.sampled_from(paths))
        try:
            _set(doc, path, copy.deepcopy(draw(hostile_value())))  # the pool stays intact
        except (KeyError, IndexError, TypeError):
            continue  # the path went away with an earlier change
        paths = _paths(doc) or paths
    if draw(st.booleans()):
        doc[draw(st.sampled_from(["extra", "x" * 300, "a\nb"]))] = \
            copy.deepcopy(draw(hostile_value()))
    text = yaml.safe_dump(doc, sort_keys=False, allow_unicode=True)
    for k, raw in enumerate(RAW_TEXTS):
        text = text.replace(f"'{RAW.format(k)}'", raw).replace(RAW.format(k), raw)
    return draw(damaged(text))


@st.composite
def damaged(draw, text: str) -> str:
    how = draw(st.sampled_from(["none", "none", "truncate", "flip", "bomb", "tab"]))
    if how == "truncate":
        return text[: draw(st.integers(0, len(text)))]
    if how == "flip":
        at = draw(st.integers(0, max(len(text) - 1, 0)))
        char = draw(st.sampled_from(["\x00", "\xff", "'", '"', ":", "&", "*", "\t", "{"]))
        return text[:at] + char + text[at + 1:]
    if how == "bomb":
        return _bomb() + text.replace(": ", ": *z8 #", 1)
    if how == "tab":
        return text.replace("  ", "\t", 1)
    return text


# -- base documents ----------------------------------------------------------------------

PLAN = {
    "plan": "fuzz-line",
    "instrument": {"resource": "TCPIP::127.0.0.1::5025::SOCKET", "dialect": "scpi-generic",
                   "timeout": "5 s"},
    "stimulus": {"start": "2.3 GHz", "stop": "2.6 GHz", "points": 31, "power": "-10 dBm",
                 "if_bandwidth": "1 kHz"},
    "measure": ["S11"],
    "checks": [{"mask": "patch-2g45"}, {"bandwidth": {"below_swr": 2.0, "at_least": "60 MHz"}},
               {"resonance": {"within": ["2.43 GHz", "2.47 GHz"]}},
               {"worst_swr": {"band": ["2.4 GHz", "2.5 GHz"], "at_most": 2}}],
    "output": {"dir": "out", "name": "{plan}-{serial}", "touchstone": {"version": 1.1}},
    "station": {"id": "line-1", "serial": {"pattern": "PA-[0-9]{4}", "max_length": 16}},
}


def _shipped(kind: str, name: str) -> dict:
    return yaml.safe_load(find_config(kind, name).read_text())


def _unit_file(folder: Path) -> Path:
    """A valid 1-port file in the plan's band (a resonance near 2.45 GHz)."""
    f = np.linspace(2.3e9, 2.6e9, 31)
    g = 0.5 * (f - 2.45e9) / 0.15e9 + 0.05j
    path = folder / "unit.s1p"
    path.write_text("# Hz S RI R 50\n" + "".join(f"{a:.1f} {b.real:.6f} {b.imag:.6f}\n"
                                                 for a, b in zip(f, g, strict=True)))
    return path


# -- running a batch ---------------------------------------------------------------------

def run_batch(tmp: Path, cases: list[dict], verdict_ok: bool) -> None:
    listing = tmp / "cases.json"
    listing.write_text(json.dumps(cases))
    result = run_limited([str(listing)], memory_mb=MEMORY_MB, timeout=60 + 25 * len(cases),
                         code="import runpy, sys; sys.argv = ['fuzz'] + sys.argv[1:]; "
                              f"runpy.run_path({str(ROOT / 'tests' / 'fuzz_harness.py')!r}, "
                              "run_name='__main__')")
    assert result.returncode == 0, f"harness died ({result.returncode}): {result.stderr[-3000:]}"
    lines = result.stdout.splitlines()
    assert len(lines) == len(cases), result.stderr[-3000:]
    allowed = {0, 1, 2} if verdict_ok else {0, 2}
    if os.environ.get("SWEEPD_FUZZ_SHOW"):
        print(cases[0]["kind"], [json.loads(x).get("code", "?") for x in lines],
              json.loads(lines[-1]).get("stderr", "")[:150].strip())
    for case, line in zip(cases, lines, strict=True):
        outcome = json.loads(line)
        shown = json.dumps(case)[:600]
        assert "crash" not in outcome, f"{shown}\n{outcome.get('crash')}"
        assert "hang" not in outcome, shown
        assert outcome["code"] in allowed, f"{shown}: exit {outcome['code']}"
        err, out = outcome["stderr"], outcome.get("stdout", "")
        if outcome["code"] == 2 and not (err == "" and out):  # check reports on stdout
            assert err.count("\n") == 1 and err.startswith(("sweepd: error: ", "usage:")), \
                f"{shown}: {err[:600]}"
        for text in (err, out):
            assert "internal error" not in text and "Traceback" not in text, f"{shown}: {text}"


def _write(tmp: Path, texts: list[str], suffix: str) -> list[Path]:
    paths = []
    for k, text in enumerate(texts):
        path = tmp / f"case{k}{suffix}"
        path.write_text(text, encoding="utf-8", errors="surrogateescape")
        paths.append(path)
    return paths


def _yaml_kind(kind: str, base: dict, long: bool, make_case) -> None:
    @_settings(long)
    @given(texts=st.lists(yaml_text(base), min_size=BATCH, max_size=BATCH))
    def check(texts: list[str]) -> None:
        import tempfile

        with tempfile.TemporaryDirectory() as folder:
            tmp = Path(folder)
            unit = _unit_file(tmp)
            cases = [make_case(path, unit) for path in _write(tmp, texts, ".yaml")]
            run_batch(tmp, cases, verdict_ok=kind in ("plan", "mask"))

    check()


@pytest.fixture(params=[False, pytest.param(True, marks=pytest.mark.long)],
                ids=["bounded", "long"])
def long(request) -> bool:
    """The bounded batch in the suite; many more examples with --long."""
    return request.param


def test_fuzz_plans(long: bool) -> None:
    _yaml_kind("plan", PLAN, long,
               lambda path, unit: {"kind": "plan", "argv": ["check", str(unit), "--plan",
                                                            str(path)]})


def test_fuzz_masks(long: bool) -> None:
    _yaml_kind("mask", _shipped("masks", "patch-2g45"), long,
               lambda path, unit: {"kind": "mask", "argv": ["check", str(unit), "--mask",
                                                            str(path)]})


def test_fuzz_kits(long: bool) -> None:
    _yaml_kind("kit", _shipped("calkits", "generic-sma-50"), long,
               lambda path, unit: {"kind": "kit", "load": "kit", "path": str(path)})


def test_fuzz_dialects(long: bool) -> None:
    _yaml_kind("dialect", _shipped("dialects", "scpi-generic"), long,
               lambda path, unit: {"kind": "dialect", "load": "dialect", "path": str(path)})


# -- Touchstone ----------------------------------------------------------------------------

TOUCHSTONE_V1 = "! a 2-port file\n# GHz S RI R 50\n" + "".join(
    f"{2.3 + 0.01 * k:.2f} 0.1 0.0 0.9 -0.1 0.9 -0.1 0.2 0.05\n" for k in range(31))
TOUCHSTONE_V2 = ("[Version] 2.0\n# GHz S MA R 50\n[Number of Ports] 1\n"
                 "[Number of Frequencies] 31\n[Network Data]\n"
                 + "".join(f"{2.3 + 0.01 * k:.2f} 0.3 {10 * k}\n" for k in range(31)) + "[End]\n")
TOKENS = ["nan", "NaN", "inf", "-inf", "1e999", "9" * 400, "-", ".", "", "0x1p3", "1e",
          "1,5", "1_0", "\t", "!", "#", "[End]", "[Number of Ports] 100000",
          "[Number of Frequencies] 99999999999999999999", "\x00", "\xb5"]


@st.composite
def touchstone_case(draw) -> tuple[str, str]:
    text = draw(st.sampled_from([TOUCHSTONE_V1, TOUCHSTONE_V2]))
    words = text.split(" ")
    for _ in range(draw(st.integers(0, 3))):
        at = draw(st.integers(0, len(words) - 1))
        words[at] = draw(st.sampled_from(TOKENS))
    text = " ".join(words)
    how = draw(st.sampled_from(["none", "truncate", "flip", "option", "keyword"]))
    if how == "truncate":
        text = text[: draw(st.integers(0, len(text)))]
    elif how == "flip":
        at = draw(st.integers(0, len(text) - 1))
        text = text[:at] + draw(st.sampled_from(["\x00", "\xff", "\n", "!", "["])) + text[at + 1:]
    elif how == "option":
        text = text.replace("# GHz S", draw(st.sampled_from(
            ["# THz Q", "# GHz S RI R nan", "# GHz S RI R 1e999", "# GHz H", "#"])), 1)
    elif how == "keyword":
        text = text.replace("[Number of Ports] 1", draw(st.sampled_from(
            ["[Number of Ports] 65", "[Number of Ports] " + "9" * 400,
             "[Number of Ports] 0", "[Reference] nan"])), 1)
    suffix = draw(st.sampled_from([".s1p", ".s2p", ".s99999p", ".ts", ".s0p", ".s64p"]))
    return text, suffix


def test_fuzz_touchstone(long: bool) -> None:
    @_settings(long)
    @given(files=st.lists(touchstone_case(), min_size=BATCH, max_size=BATCH))
    def check(files: list[tuple[str, str]]) -> None:
        import tempfile

        with tempfile.TemporaryDirectory() as folder:
            tmp = Path(folder)
            cases = []
            for k, (text, suffix) in enumerate(files):
                path = tmp / f"case{k}{suffix}"
                path.write_bytes(text.encode("latin-1", "replace"))
                cases.append({"kind": "touchstone",
                              "argv": ["check", str(path), "--mask", "patch-2g45"]})
            run_batch(tmp, cases, verdict_ok=True)

    check()


# -- cal sets ------------------------------------------------------------------------------

def _valid_calset() -> bytes:
    from acquire.calibration import CalSet, load_kit, solve
    from drivers.stimulus import Stimulus

    kit = load_kit("ideal")
    stim = Stimulus(2.3e9, 2.6e9, 31, -10.0, 1e3)
    f = stim.frequencies()
    raw = {f"{k}.S11": kit.reflection(k, f) * 0.9 + 0.01 for k in ("open", "short", "load")}
    sol = solve("one-port", f, raw, kit)
    return CalSet("patch-line-a", sol.model, stim, "a,b,c,d", kit.name, kit.sha256, "port 1",
                  created_utc="2026-12-02T06:00:00.000000Z", raw=raw,
                  figures=dict(sol.figures)).to_bytes()


JSON_RAW = ["NaN", "Infinity", "1e999", "9" * 400, "9" * 5000, "[" * 3000 + "]" * 3000,
            '"' + "x" * 100_000 + '"', "null", "true", "{}", "[]", '"2026-13-45T99:99:99Z"',
            "-1", "0", "1e-400", '"../../x"', '"a\\nb"']


@st.composite
def calset_case(draw, valid: bytes) -> bytes:
    how = draw(st.sampled_from(["header", "header", "flip", "truncate", "npy", "extra"]))
    if how == "flip":
        at = draw(st.integers(0, len(valid) - 1))
        return valid[:at] + bytes([valid[at] ^ draw(st.integers(1, 255))]) + valid[at + 1:]
    if how == "truncate":
        return valid[: draw(st.integers(0, len(valid)))]
    src = zipfile.ZipFile(io.BytesIO(valid))
    members = {info.filename: src.read(info.filename) for info in src.infolist()}
    if how == "header":
        header = json.loads(members["header.json"])
        paths = _paths(header)
        path = draw(st.sampled_from(paths))
        _set(header, path, "@@RAW@@")
        members["header.json"] = json.dumps(header).replace(
            '"@@RAW@@"', draw(st.sampled_from(JSON_RAW))).encode()
    elif how == "npy":
        name = draw(st.sampled_from(sorted(n for n in members if n.endswith(".npy"))))
        shape = draw(st.sampled_from([(10**12,), (31, 10**6), (0,), (31,), (2**62,)]))
        dtype = draw(st.sampled_from(["<f8", "<c16", "|O", "<i8", ">f8"]))
        stream = io.BytesIO()
        np.lib.format.write_array_header_1_0(
            stream, {"shape": shape, "fortran_order": False, "descr": dtype})
        members[name] = stream.getvalue() + b"\0" * draw(st.sampled_from([0, 8, 496, 4096]))
    else:
        members[draw(st.sampled_from(["extra.bin", "header.json"]))] = b"\0" * 64
    out = io.BytesIO()
    deflate = draw(st.booleans()) and how == "extra"
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED if deflate else zipfile.ZIP_STORED) \
            as archive:
        for name, payload in members.items():
            archive.writestr(name, payload)
    return out.getvalue()


def test_fuzz_calsets(long: bool) -> None:
    valid = _valid_calset()

    @_settings(long)
    @given(images=st.lists(calset_case(valid), min_size=BATCH, max_size=BATCH))
    def check(images: list[bytes]) -> None:
        import tempfile

        with tempfile.TemporaryDirectory() as folder:
            tmp = Path(folder)
            cases = []
            for k, image in enumerate(images):
                sub = tmp / f"cal{k}"
                sub.mkdir()
                (sub / "good.calset").write_bytes(valid)  # a valid one beside it
                path = sub / f"20261202T090000Z-patch-line-a-{k:010d}.calset"
                path.write_bytes(image)
                cases.append({"kind": "calset", "load": "calset", "path": str(path)})
            run_batch(tmp, cases, verdict_ok=False)

    check()


# -- spool job files -----------------------------------------------------------------------

@st.composite
def job_files(draw) -> dict[str, str]:
    plan_text = yaml.safe_dump({**PLAN, "schedule": {"every": "1 s", "count": 2}})
    job = {"id": "fuzz-line-001", "plan_name": "fuzz-line", "plan_source": "/tmp/p.yaml",
           "plan_text": plan_text, "output_dir": "/tmp/out",
           "resource": "TCPIP::127.0.0.1::5025::SOCKET",
           "submitted_utc": "2026-12-02T06:00:00.000Z", "submitted_by": "tester"}
    key = draw(st.sampled_from(sorted(job)))
    value = draw(st.one_of(st.sampled_from(SCALARS[:3] + SCALARS[5:]),
                           st.sampled_from([_bomb() + "plan: *z8\n", "[" * 3000,
                                            "plan: " + "9" * 5000])))
    job[key] = value
    text = json.dumps(job, allow_nan=True)
    if draw(st.booleans()):
        text = text.replace('"tester"', draw(st.sampled_from(JSON_RAW)), 1)
    state = draw(st.sampled_from(['{"state": "queued"}', "[" * 5000, '{"state": NaN}',
                                  '{"state": ' + "9" * 5000 + "}", "", "\xff"]))
    return {"job.json": text, "state.json": state,
            "status.json": draw(st.sampled_from(["{}", "[" * 5000, '{"sweeps": 1e999}']))}


def test_fuzz_spool_job_files(long: bool) -> None:
    @_settings(long)
    @given(jobs=st.lists(job_files(), min_size=BATCH, max_size=BATCH))
    def check(jobs: list[dict[str, str]]) -> None:
        import tempfile

        with tempfile.TemporaryDirectory() as folder:
            tmp = Path(folder)
            cases = []
            for k, files in enumerate(jobs):
                spool = tmp / f"spool{k}"
                job_dir = spool / "jobs" / "fuzz-line-001"
                job_dir.mkdir(parents=True)
                spool.chmod(0o700)
                (spool / "jobs").chmod(0o700)
                for name, text in files.items():
                    (job_dir / name).write_text(text, encoding="utf-8", errors="replace")
                cases.append({"kind": "spool", "argv": ["status", "--spool", str(spool)]})
                cases.append({"kind": "spool", "argv": ["status", "--spool", str(spool),
                                                        "--json"]})
                cases.append({"kind": "job", "load": "job", "path": str(job_dir)})
            run_batch(tmp, cases, verdict_ok=False)

    check()
