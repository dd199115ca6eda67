"""Statistics, Cpk and ``sweepd summary``.

Process capability: Cpk = min(USL − μ, μ − LSL) / (3σ) (NIST/SEMATECH e-Handbook of
Statistical Methods, §6.1.6; ISO 22514-2), checked on hand-worked numbers and against
numpy; the summary command over journals filled from judged sweeps.
"""

from __future__ import annotations

import csv
import io
import json
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import pytest
from schema_support import validate
from test_station_support import PLAN

from acquire.capture.records import worst_margin
from acquire.checks import evaluate_checks
from acquire.cli import main
from acquire.journal import StoredFields, journal_in
from acquire.plan import load_plan
from acquire.station.counters import count_yield
from acquire.station.errors import StationError
from acquire.station.figures import key_figures, with_figures
from acquire.station.stats import capability_index, describe, pooled_sd
from acquire.station.summary import load_selection, parse_since
from acquire.sweep import Sweep

# -- Cpk and statistics --------------------------------------------------------------------


def test_cpk_hand_worked_example() -> None:
    """Five readings 9.8, 10.0, 10.2, 10.1, 9.9 with LSL 9.5, USL 10.8, worked by hand:
    mean 10.0; squared deviations 0.04 + 0 + 0.04 + 0.01 + 0.01 = 0.10; s = sqrt(0.10/4)
    = 0.158114; Cpu = 0.8/(3·0.158114) = 1.686548; Cpl = 0.5/0.474342 = 1.054093;
    Cpk = min = 1.054093 (definition: NIST/SEMATECH e-Handbook §6.1.6, ISO 22514-2)."""
    st = describe([9.8, 10.0, 10.2, 10.1, 9.9], lsl=9.5, usl=10.8)
    assert (st.n, st.min, st.max) == (5, 9.8, 10.2)
    assert st.mean == pytest.approx(10.0, abs=1e-12)
    assert st.sd == pytest.approx(0.158114, abs=1e-6)
    assert st.ppk == pytest.approx(1.054093, abs=1e-6)
    assert st.cpk == st.ppk  # one subgroup: the within-subgroup sd is the overall one
    assert describe([9.8, 10.0, 10.2, 10.1, 9.9], usl=10.8).ppk == pytest.approx(1.686548,
                                                                                abs=1e-6)


def test_cpk_handbook_example() -> None:
    """NIST/SEMATECH e-Handbook §6.1.6 example (values recalled from memory): USL 20,
    LSL 8, mean 16, sigma 2 gives Cpu 0.6667, Cpl 1.3333, Cpk 0.6667."""
    index = capability_index
    assert index(16.0, 2.0, 8.0, 20.0) == pytest.approx(2 / 3)
    assert index(16.0, 2.0, lsl=8.0) == pytest.approx(4 / 3)
    assert index(16.0, 2.0, usl=20.0) == pytest.approx(2 / 3)
    assert index(16.0, 2.0) is None and index(16.0, 0.0, 8.0, 20.0) is None
    assert index(21.0, 2.0, 8.0, 20.0) == pytest.approx(-1 / 6)  # mean outside: negative


def test_pooled_within_subgroup_sd_hand_worked() -> None:
    """Subgroups [1, 2, 3] (s² = 1) and [4, 6] (s² = 2), worked by hand: pooled
    s² = (2·1 + 1·2) / (2 + 1) = 4/3 (pooled variance, e.g. NIST/SEMATECH e-Handbook
    §7.4.3 for the form; from memory). Overall: mean 3.2, s² = 14.8/4 = 3.7."""
    sd, groups = pooled_sd(np.array([1.0, 2.0, 3.0, 4.0, 6.0]), ["a", "a", "a", "b", "b"])
    assert sd == pytest.approx(np.sqrt(4 / 3), rel=1e-15) and groups == 2
    st = describe([1, 2, 3, 4, 6], lsl=0.0, usl=10.0, groups=["a", "a", "a", "b", "b"])
    assert st.sd == pytest.approx(np.sqrt(3.7), rel=1e-15)
    assert st.ppk == pytest.approx(3.2 / (3 * np.sqrt(3.7)), rel=1e-12)  # overall sd
    assert st.cpk == pytest.approx(3.2 / (3 * np.sqrt(4 / 3)), rel=1e-12)  # within sd
    assert (st.sd_within, st.subgroups) == (sd, 2)
    lone = describe([1.0, 2.0, 4.0], lsl=0.0, groups=[1, 2, 3])  # one value per run
    assert lone.ppk is not None and lone.cpk is None and lone.subgroups == 3


def test_pooled_sd_agrees_with_the_anova_within_groups_mean_square() -> None:
    """The pooled variance is the within-groups mean square of one-way ANOVA (total sum of
    squares minus the between-groups one, over N - k): computed that way with numpy."""
    rng = np.random.default_rng(4)
    groups = [rng.normal(mu, 1.5, n) for mu, n in ((10, 7), (12, 3), (9, 11), (11, 2))]
    x = np.concatenate(groups)
    total = np.sum((x - x.mean()) ** 2)
    between = sum(g.size * (g.mean() - x.mean()) ** 2 for g in groups)
    want = np.sqrt((total - between) / (x.size - len(groups)))
    labels = [k for k, g in enumerate(groups) for _ in g]
    assert pooled_sd(x, labels)[0] == pytest.approx(want, rel=1e-12)


def test_statistics_agree_with_numpy() -> None:
    rng = np.random.default_rng(11)
    x = rng.normal(2.45e9, 8e6, 37)
    st = describe([*x, None, float("nan")], lsl=2.42e9, usl=2.48e9)
    assert st.n == 37
    assert st.mean == pytest.approx(np.mean(x), rel=1e-15)
    assert st.sd == pytest.approx(np.std(x, ddof=1), rel=1e-12)
    assert (st.min, st.max) == (np.min(x), np.max(x))
    want = min(2.48e9 - np.mean(x), np.mean(x) - 2.42e9) / (3 * np.std(x, ddof=1))
    assert st.ppk == pytest.approx(want, rel=1e-12)
    one = describe([3.0])
    assert (one.n, one.mean, one.sd, one.ppk, one.cpk) == (1, 3.0, None, None, None)
    assert describe([]).n == 0


# -- summary over a journal ------------------------------------------------------------------

F = np.linspace(2.3e9, 2.6e9, 601)


def antenna(f0: float, r: float = 45.0, q: float = 12.0) -> np.ndarray:
    w = 2 * np.pi * F
    ind = q * r / (2 * np.pi * f0)
    cap = 1 / ((2 * np.pi * f0) ** 2 * ind)
    z = r + 1j * (w * ind - 1 / (w * cap))
    return (z - 50) / (z + 50)


def fill(folder: Path, units: list[tuple[str, float]], *, kind: str = "station") -> list[dict]:
    """Journal judged sweeps of antennas resonating at the given frequencies."""
    plan = load_plan(PLAN)
    out = []
    with journal_in(folder) as j:
        run = j.start_run(kind, plan.name, station="t")
        for seq, (serial, f0) in enumerate(units):
            sweep = Sweep(F, antenna(f0).reshape(-1, 1, 1), meta={"serial": serial})
            verdict = evaluate_checks(list(plan.checks), sweep)
            verdict = with_figures(verdict, key_figures(sweep, verdict, plan, None))
            p = j.plan_measurement(run, seq, folder / f"{serial}-{seq}.s1p", serial=serial)
            j.store_measurement(p, touchstone=p.touchstone, summary=None, raw_touchstone=None,
                                fields=StoredFields(
                                    verdict=verdict.verdict, exit_code=verdict.exit_code,
                                    worst_margin=worst_margin(verdict),
                                    metrics_json=json.dumps(verdict.metrics),
                                    verdict_json=verdict.to_json(indent=None)))
            out.append(verdict.to_dict())
        j.record_golden(run, "GOLDEN", True)
        j.record_golden(run, "GOLDEN", False, message="moved")
        j.end_run(run)
    return out


UNITS = [("PA-0001", 2.445e9), ("PA-0002", 2.452e9), ("PA-0003", 2.437e9),
         ("PA-0004", 2.461e9), ("PA-0002", 2.449e9)]  # the last is a retest of PA-0002


def test_statistics_per_metric_with_cpk_against_the_check_limits(tmp_path: Path) -> None:
    verdicts = fill(tmp_path, UNITS)
    sel = load_selection(tmp_path)
    (plan,) = sel.plans
    assert plan.measurements == 5 and plan.golden_checks == 2 and plan.golden_failed == 1
    y = plan.counters
    assert (y.tested, y.retests, y.first_tested) == (4, 1, 4)
    by_key = {m.metric.key: m.stats for m in plan.metrics}
    first = verdicts[:4]  # the first measurement of each unit
    res = [v["metrics"]["S11"]["resonance_hz"] for v in first]
    st = by_key["resonance_hz"]
    assert st.n == 4 and st.mean == pytest.approx(np.mean(res)) and st.ppk is None
    assert st.sd == pytest.approx(np.std(res, ddof=1))
    # the resonance values themselves are the antennas' (minimum |Γ|, within a step)
    np.testing.assert_allclose(res, [u[1] for u in UNITS[:4]], atol=0.5e6)
    window = by_key["resonance in 2.42 GHz..2.48 GHz: resonance"]
    want = min(2.48e9 - np.mean(res), np.mean(res) - 2.42e9) / (3 * np.std(res, ddof=1))
    assert (window.lsl, window.usl) == (2.42e9, 2.48e9) and window.ppk == pytest.approx(want)
    assert window.cpk == window.ppk  # one run: within-run sd = overall sd
    swr = [v["checks"][0]["segments"][0]["worst"]["value"] for v in first]
    mask = by_key["mask patch-2g45 [2.4 GHz band] worst swr"]
    assert (mask.lsl, mask.usl) == (None, 2.0)
    assert mask.ppk == pytest.approx((2.0 - np.mean(swr)) / (3 * np.std(swr, ddof=1)))
    width = by_key["bandwidth below SWR 2: width"]
    assert width.lsl == 60e6 and width.usl is None
    assert by_key["worst_swr_in_band"].mean == pytest.approx(np.mean(swr))
    every = {m.metric.key: m.stats for m in load_selection(
        tmp_path, all_attempts=True).plans[0].metrics}
    assert every["resonance_hz"].n == 5


def test_summary_command_text_json_and_csv(tmp_path: Path, capsys) -> None:
    fill(tmp_path, UNITS)
    assert main(["summary", str(tmp_path)]) == 0
    text = capsys.readouterr().out
    assert "plan patch-station: 5 measurements (5 stored); golden checks 2 (1 failed)" in text
    assert "tested 4 | passed" in text and "retests 1" in text
    assert "resonance (min |S11|)" in text and "MHz" in text
    assert "Ppk" in text and "Cpk" in text
    row = next(line for line in text.splitlines() if "2.48 GHz: resonance" in line)
    assert row.split()[-4:-2] == ["2420", "2480"]  # limits shown in MHz
    assert main(["summary", str(tmp_path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["format"] == "sweepd-summary" and data["plans"][0]["yield"]["tested"] == 4
    assert main(["summary", str(tmp_path), "--csv"]) == 0
    table = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert [r["serial"] for r in table] == [u[0] for u in UNITS]
    assert [r["attempt"] for r in table] == ["1", "1", "1", "1", "2"]
    assert float(table[0]["resonance_hz"]) == pytest.approx(2.445e9, abs=0.5e6)
    out_csv = tmp_path / "export" / "s.csv"
    assert main(["summary", str(tmp_path), "--csv", str(out_csv)]) == 0
    assert "CSV: " in capsys.readouterr().out
    assert out_csv.read_text().startswith("id,run_id,plan,station,time_utc,serial")


def test_summary_selection_and_errors(tmp_path: Path, capsys) -> None:
    fill(tmp_path, UNITS)
    assert main(["summary", str(tmp_path), "--since", "2999-01-01"]) == 0
    assert "0 measurement(s) since 2999" in capsys.readouterr().out
    assert main(["summary", str(tmp_path), "--since", "1 h"]) == 0
    assert "5 measurement(s)" in capsys.readouterr().out
    assert main(["summary", str(tmp_path), "--plan", "other"]) == 0
    assert "nothing to summarise" in capsys.readouterr().out
    assert main(["summary", str(tmp_path), "--since", "yesterday"]) == 2
    assert "--since 'yesterday': give a date or time" in capsys.readouterr().err
    assert main(["summary", str(tmp_path / "nope")]) == 2
    assert "no such folder" in capsys.readouterr().err
    (tmp_path / "empty").mkdir()
    assert main(["summary", str(tmp_path / "empty")]) == 2
    assert "no journal (journal.sqlite) there" in capsys.readouterr().err


def test_since_forms() -> None:
    now = datetime(2026, 12, 2, 12, 0, tzinfo=timezone.utc)
    assert parse_since("8 h", now) == "2026-12-02T04:00:00.000Z"
    assert parse_since("90 min", now) == "2026-12-02T10:30:00.000Z"
    assert parse_since("2026-12-02T06:00Z") == "2026-12-02T06:00:00.000Z"
    assert parse_since("2026-12-02 06:00+01:00") == "2026-12-02T05:00:00.000Z"
    local = datetime(2026, 12, 2, 6, 0).astimezone().astimezone(timezone.utc)
    assert parse_since("2026-12-02T06:00") == local.isoformat(timespec="milliseconds").replace(
        "+00:00", "Z")
    with pytest.raises(StationError):
        parse_since("-3 h")


# -- unjudged units, yield over judged ones -------------------------------------------------


def test_a_plan_without_checks_is_unjudged_not_failed(tmp_path: Path, capsys) -> None:
    """Sweeps of a plan without checks have no verdict: they are neither passed nor
    failed, and the yield is over judged units only (none here)."""
    with journal_in(tmp_path) as j:
        run = j.start_run("run", "no-checks")
        for seq, serial in enumerate(("U-1", "U-2", "U-3")):
            p = j.plan_measurement(run, seq, tmp_path / f"{serial}.s1p", serial=serial)
            j.store_measurement(p, touchstone=p.touchstone, summary=None, raw_touchstone=None,
                                fields=StoredFields(metrics_json="{}"))
    assert main(["summary", str(tmp_path)]) == 0
    text = capsys.readouterr().out
    assert "tested 3 | passed 0 | failed 0 | unjudged 3 | yield n/a (0 judged)" in text
    assert main(["summary", str(tmp_path), "--json"]) == 0
    counters = validate(capsys.readouterr().out, "summary")["plans"][0]["yield"]
    assert (counters["tested"], counters["judged"], counters["passed"], counters["failed"],
            counters["unjudged"], counters["yield"]) == (3, 0, 0, 0, 3, None)


def test_yield_is_over_judged_units_and_says_how_many() -> None:
    rows = [{"serial": "A", "attempt": 1, "verdict": "pass"},
            {"serial": "B", "attempt": 1, "verdict": "fail"},
            {"serial": "C", "attempt": 1, "verdict": None},
            {"serial": "D", "attempt": 1, "verdict": "pass"},
            {"serial": "E", "attempt": 1, "verdict": "pass"}]
    y = count_yield(rows)
    assert (y.tested, y.judged, y.passed, y.failed, y.unjudged) == (5, 4, 3, 1, 1)
    assert y.yield_ == pytest.approx(0.75) and y.first_pass_yield == pytest.approx(0.75)
    assert "yield 75.0 % (4 judged)" in y.line()


def test_subgroups_are_the_journal_runs(tmp_path: Path, capsys) -> None:
    """Two shifts of three units each: Ppk from the sd over all six, Cpk from the pooled
    sd within the two shifts (a shift-to-shift offset lowers Ppk, not Cpk)."""
    a = [("PA-0001", 2.440e9), ("PA-0002", 2.442e9), ("PA-0003", 2.444e9)]
    b = [("PA-0004", 2.452e9), ("PA-0005", 2.454e9), ("PA-0006", 2.456e9)]
    first = [v["metrics"]["S11"]["resonance_hz"] for v in fill(tmp_path, a)]
    second = [v["metrics"]["S11"]["resonance_hz"] for v in fill(tmp_path, b)]
    (plan,) = load_selection(tmp_path).plans
    st = {m.metric.key: m.stats for m in plan.metrics}[
        "resonance in 2.42 GHz..2.48 GHz: resonance"]
    x = np.array(first + second)
    within = np.sqrt((np.var(first, ddof=1) * 2 + np.var(second, ddof=1) * 2) / 4)
    near = min(2.48e9 - x.mean(), x.mean() - 2.42e9)
    assert st.subgroups == 2 and st.sd_within == pytest.approx(within, rel=1e-9)
    assert st.ppk == pytest.approx(near / (3 * np.std(x, ddof=1)), rel=1e-9)
    assert st.cpk == pytest.approx(near / (3 * within), rel=1e-9)
    assert st.cpk > st.ppk
    assert main(["summary", str(tmp_path), "--json"]) == 0
    metrics = validate(capsys.readouterr().out, "summary")["plans"][0]["metrics"]
    row = next(m for m in metrics if m["key"] == "resonance in 2.42 GHz..2.48 GHz: resonance")
    assert (row["ppk"], row["cpk"], row["subgroups"]) == (st.ppk, st.cpk, 2)
