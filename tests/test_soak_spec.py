"""The soak plan sections: defaults, the shipped plan, and one-line errors with key paths."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
import yaml

from acquire.errors import PlanError
from acquire.library import library_dir
from acquire.plan import load_plan
from acquire.soak.spec import DEFAULT_RESERVE, Schedule, parse_soak
from acquire.soak.timeline import Timeline

BASE = {
    "plan": "soak-test",
    "instrument": {"resource": "TCPIP::127.0.0.1::5025::SOCKET"},
    "stimulus": {"start": "2.3 GHz", "stop": "2.6 GHz", "points": 201, "power": "-10 dBm",
                 "if_bandwidth": "1 kHz"},
    "schedule": {"every": "30 s", "for": "2 h"},
}


def write_plan(tmp_path: Path, **changes: object) -> Path:
    data = {**BASE, **changes}
    data = {k: v for k, v in data.items() if v is not None}
    path = tmp_path / "soak.yaml"
    path.write_text(yaml.safe_dump(data))
    return path


def spec_of(tmp_path: Path, **changes: object):
    return parse_soak(load_plan(write_plan(tmp_path, **changes)))


def test_shipped_soak_plan() -> None:
    spec = parse_soak(load_plan(library_dir("plans") / "patch-soak.yaml"))
    assert spec.schedule == Schedule(every_s=60.0, duration_s=8 * 3600.0)
    assert spec.schedule.total() == 480
    assert spec.reference is None and spec.parameter == "S11"
    assert spec.band_hz == (2.40e9, 2.50e9)
    assert spec.keep.every == 10
    assert spec.alarms.watched() == {"deviation_db": 1.0, "deviation_deg": 10.0,
                                     "resonance_shift_hz": 2e6, "worst_swr": 2.0,
                                     "resonance_adev_hz": 200e3}
    assert spec.disk_reserve_bytes == 200 * 10**6


def test_defaults(tmp_path: Path) -> None:
    spec = spec_of(tmp_path, schedule={"every": 0, "count": 50})
    assert spec.schedule == Schedule(every_s=0.0, count=50)
    assert spec.keep.every == 1 and spec.keep.failing and spec.keep.over_threshold
    assert spec.alarms.watched() == {} and spec.faults.retries == 2
    assert spec.disk_reserve_bytes == DEFAULT_RESERVE


def test_alarm_command_is_split_without_a_shell(tmp_path: Path) -> None:
    spec = spec_of(tmp_path, soak={"alarms": {"command": "notify 'soak alarm' --urgent"}})
    assert spec.alarms.command == ("notify", "soak alarm", "--urgent")


@pytest.mark.parametrize(("changes", "message"), [
    ({"schedule": None}, r"schedule: is required for a soak"),
    ({"schedule": {"every": "1 min", "for": "1 h", "count": 3}},
     r"schedule: give 'for' \(a duration\) or 'count', not both"),
    ({"schedule": {"for": "1 h"}}, r"schedule.every: is required"),
    ({"schedule": {"every": "-1 s"}}, r"schedule.every: must be from 0 s"),
    ({"schedule": {"every": "1 min", "count": 0}}, r"schedule.count: must be an integer from 1"),
    ({"soak": {"parameter": "S21"}}, r"soak.parameter: must be one of S11, got 'S21'"),
    ({"soak": {"reference": "missing.s1p"}},
     r"soak.reference: must be 'first' or an existing Touchstone file"),
    ({"soak": {"band": ["2.5 GHz", "2.4 GHz"]}}, r"soak.band: low edge must be below"),
    ({"soak": {"band": ["3 GHz", "4 GHz"]}}, r"soak.band: .* lies outside the sweep"),
    ({"soak": {"keep": {"every": 0}}}, r"soak.keep.every: must be an integer from 1"),
    ({"soak": {"alarms": {"deviation_db": "loud"}}},
     r"soak.alarms.deviation_db: expected a decibel"),
    ({"soak": {"alarms": {"worst_swr": 0.5}}},
     r"soak.alarms.worst_swr: must be at least 1, got 0.5"),
    ({"soak": {"alarms": {"command": "'unclosed"}}}, r"soak.alarms.command: cannot split"),
    ({"soak": {"faults": {"backoff_first": "10 s", "backoff_max": "1 s"}}},
     r"soak.faults.backoff_max: must be at least backoff_first"),
    ({"soak": {"disk_reserve": "lots"}}, r"soak.disk_reserve: must be a size such as 200 MB"),
    ({"soak": {"keeep": {}}}, r"soak: unknown key 'keeep' \(did you mean 'keep'\?\)"),
])
def test_bad_sections_name_the_file_and_key(tmp_path: Path, changes: dict, message: str) -> None:
    with pytest.raises(PlanError) as info:
        spec_of(tmp_path, **changes)
    text = str(info.value)
    assert text.startswith(f"plan {tmp_path / 'soak.yaml'}: ")
    assert "\n" not in text
    assert re.search(message, text), text


def test_two_port_soak_tracks_a_transmission_without_resonance_alarms(tmp_path: Path) -> None:
    spec = spec_of(tmp_path, measure="two-port", soak={"parameter": "S21",
                                                      "alarms": {"deviation_deg": "3 deg"}})
    assert spec.parameter == "S21" and not spec.reflection
    with pytest.raises(PlanError, match=r"soak.alarms.resonance_shift: needs a reflection"):
        spec_of(tmp_path, measure="two-port",
                soak={"parameter": "S21", "alarms": {"resonance_shift": "1 MHz"}})


def test_sizes(tmp_path: Path) -> None:
    assert spec_of(tmp_path, soak={"disk_reserve": "1.5 GiB"}).disk_reserve_bytes == \
        int(1.5 * 2**30)
    assert spec_of(tmp_path, soak={"disk_reserve": 4096}).disk_reserve_bytes == 4096


def test_timeline_slots_and_extent() -> None:
    tl = Timeline(Schedule(every_s=10.0, duration_s=35.0), start=1000.0)
    assert [tl.due(k) for k in range(4)] == [1000.0, 1010.0, 1020.0, 1030.0]
    assert tl.in_plan(3, 0.0) and not tl.in_plan(4, 0.0)
    assert tl.schedule.total() == 4
    assert tl.current_index(1025.0) == 2 and tl.slot_end(2) == 1030.0
    assert tl.end_time() == 1035.0
    fast = Timeline(Schedule(every_s=0.0, duration_s=5.0), start=0.0)
    assert fast.in_plan(10**6, 4.9) and not fast.in_plan(0, 5.0)
    assert fast.slot_end(3) == float("inf")


def test_progress_line_for_a_terminal() -> None:
    from acquire.soak.progress import drift_text, progress_line

    status = {"sweeps": {"done": 120, "missed": 2}, "schedule": {"planned": 480},
              "next_sweep": {"index": 122, "due_utc": "2026-12-02T06:10:00.000Z"},
              "eta_utc": None,
              "drift": {"latest": {"resonance_shift_hz": -12.5e3, "max_db": 0.05,
                                   "max_deg": 0.8}}}
    line = progress_line("patch-soak-001", status)
    assert line.startswith("job patch-soak-001: 120/480 sweeps, 2 missed, next ")
    assert line.endswith("drift res -12.5 kHz, 0.050 dB, 0.80 deg")
    assert drift_text({}) == "-"
