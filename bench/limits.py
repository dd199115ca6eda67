#!/usr/bin/env python3
"""What the input bounds cost, side by side with the read they guard.

    .venv/bin/python bench/limits.py [--rounds 5]

- YAML: the bounded loader (size, depth and alias-expansion checks on the node graph,
  ``drivers.yamltext``) against a plain ``yaml.safe_load`` of the same shipped plan,
  dialect and kit text.
- Touchstone: the number count made before parsing (``acquire.touchstone.limits``)
  against the whole read of the same 2-port file of 200,001 points.
- Cal set: the bounded reads (member checks, bounded JSON, shapes checked before the
  arrays are read) against plain ``json.loads`` and ``numpy`` reads of the same members.

Each cell is the best of ``--rounds`` runs (other load on a shared machine only adds
time). Goal: the bounds add no more than a few tenths to a read (ratio near 1).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def best(fn, rounds: int) -> float:
    times = []
    for _ in range(rounds):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def yaml_rows(rounds: int) -> list[tuple[str, float, float]]:
    import yaml

    from acquire.library import find_config
    from drivers.errors import SweepdError
    from drivers.yamltext import load_yaml_text

    rows = []
    for kind, name in (("plans", "patch-line-a"), ("dialects", "scpi-generic"),
                       ("calkits", "generic-sma-50")):
        text = find_config(kind, name).read_text()
        ours = best(lambda t=text: [load_yaml_text(t, "x", SweepdError) for _ in range(50)],
                    rounds)
        plain = best(lambda t=text: [yaml.safe_load(t) for _ in range(50)], rounds)
        rows.append((f"yaml {kind[:-1]} {name} (x50)", ours, plain))
    return rows


def touchstone_row(rounds: int) -> tuple[str, float, float]:
    import numpy as np

    from acquire.touchstone import parse_touchstone
    from acquire.touchstone.limits import count_numbers

    f = np.linspace(1e9, 2e9, 200_001)
    text = "# Hz S RI R 50\n" + "".join(
        f"{x:.1f} 0.123456789 -0.98765432 0.5 0.25 0.5 0.25 0.1 0.2\n" for x in f)
    data = text.encode()
    count = best(lambda: count_numbers(data, 0, len(data)), rounds)
    whole = best(lambda: parse_touchstone(text, ports=2), rounds)
    return ("touchstone 2-port 200,001 points: count / whole read", count, whole)


def calset_row(rounds: int) -> tuple[str, float, float]:
    import io
    import json
    import zipfile

    import numpy as np

    from acquire.calibration import CalSet, load_kit, solve
    from acquire.calibration.calfile import check_members, parse_json, read_npy
    from drivers.stimulus import Stimulus

    kit = load_kit("ideal")
    stim = Stimulus(1e9, 2e9, 100_001, -10.0, 1e3)
    freq = stim.frequencies()
    raw = {f"{k}.S11": kit.reflection(k, freq) * 0.9 + 0.01 for k in ("open", "short", "load")}
    sol = solve("one-port", freq, raw, kit)
    image = CalSet("p", sol.model, stim, "a,b,c,d", kit.name, kit.sha256, "port 1",
                   created_utc="2026-12-02T06:00:00.000000Z", raw=raw,
                   figures=dict(sol.figures)).to_bytes()

    archive = zipfile.ZipFile(io.BytesIO(image))
    members = {n: archive.read(n) for n in archive.namelist() if n.endswith(".npy")}
    shape = (stim.points,)

    def bounded() -> None:
        check_members(archive)
        parse_json(archive.read("header.json"), "header.json")
        for name, raw in members.items():
            read_npy(raw, name, np.float64 if name == "freq_hz.npy" else np.complex128, shape)

    def plain() -> None:
        json.loads(archive.read("header.json"))
        for raw in members.values():
            np.lib.format.read_array(io.BytesIO(raw), allow_pickle=False)

    ours = best(bounded, rounds)
    other = best(plain, rounds)
    return ("cal set 100,001 points: bounded / plain member reads", ours, other)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=5)
    rounds = parser.parse_args().rounds
    rows = [*yaml_rows(rounds), touchstone_row(rounds), calset_row(rounds)]
    width = max(len(r[0]) for r in rows)
    print(f"{'what':<{width}}  {'ours ms':>9}  {'other ms':>9}  {'ratio':>6}")
    for what, ours, other in rows:
        print(f"{what:<{width}}  {ours * 1e3:9.2f}  {other * 1e3:9.2f}  {ours / other:6.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
