"""The HTTP API in process (ASGI test client) against the simulator over TCP: the same
documents as the command line, sessions kept open between units, per-instrument
serialisation, and one-line 4xx refusals for bad requests."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from fastapi.testclient import TestClient
from schema_support import validate
from test_soak_support import soak_plan
from test_station_support import BAD, GOOD, install_cal, write_plan

from acquire.instruments import Instruments, _open_session
from acquire.service.access import AccessError, check_access, parse_listen
from acquire.service.app import Service, create_app
from acquire.service.plans import PlanBook
from simulators.server import SimServer


@pytest.fixture
def sim():
    with SimServer(time_scale=0.0, noise=False) as server:
        yield server


class CountingOpener:
    def __init__(self) -> None:
        self.opened = 0

    def __call__(self, plan, resource):
        self.opened += 1
        return _open_session(plan, resource)


@pytest.fixture
def world(sim, tmp_path):
    install_cal(tmp_path / "out")
    write_plan(tmp_path, sim.tcp_resource, name="patch-station.yaml",
               station={"golden": None})
    soak_plan(tmp_path / "night-soak.yaml", sim.tcp_resource, tmp_path / "soak-out", count=3)
    opener = CountingOpener()
    instruments = Instruments(opener)
    service = Service(PlanBook(tmp_path), tmp_path / "spool", instruments, daemon_here=False)
    with TestClient(create_app(service)) as client:
        yield client, service, opener
    instruments.close_all()


def one_line(response) -> str:
    text = response.json()["error"]
    assert "\n" not in text and text
    return text


def test_units_measured_through_the_api_keep_one_session(world, sim) -> None:
    client, _, opener = world
    sim.bench.select_unit(GOOD[0])
    first = client.post("/api/v1/measure", json={"plan": "patch-station", "serial": GOOD[0],
                                                  "station": "mes-1"})
    assert first.status_code == 200, first.text
    doc = validate(first.json(), "measure")
    assert (doc["verdict"], doc["exit_code"], doc["serial"], doc["station"]) == (
        "pass", 0, GOOD[0], "mes-1")
    assert Path(doc["files"]["touchstone"]).is_file()
    sim.bench.select_unit(BAD[0])
    second = client.post("/api/v1/measure", json={"plan": "patch-station", "serial": BAD[0]})
    assert second.status_code == 200
    assert (second.json()["verdict"], second.json()["exit_code"]) == ("fail", 1)
    assert opener.opened == 1  # the second unit reused the open, configured session


def test_an_instrument_fault_answers_502_and_the_next_call_reconnects(world, sim) -> None:
    client, _, opener = world
    sim.bench.select_unit(GOOD[1])
    assert client.post("/api/v1/measure", json={"plan": "patch-station",
                                                "serial": GOOD[1]}).status_code == 200
    sim.faults.schedule(at=[[2, "drop"]])  # the simulator's second sweep: the next unit
    failed = client.post("/api/v1/measure", json={"plan": "patch-station", "serial": GOOD[1]})
    assert failed.status_code == 502, failed.text
    doc = validate(failed.json(), "measure")
    assert doc["exit_code"] == 2 and "connection" in doc["error"]
    again = client.post("/api/v1/measure", json={"plan": "patch-station", "serial": GOOD[1]})
    assert again.status_code == 200 and again.json()["exit_code"] == 0
    assert opener.opened == 2  # the broken session was dropped, a fresh one opened


def test_a_busy_instrument_names_its_holder(world, sim) -> None:
    client, service, _ = world
    assert service.instruments.try_hold(sim.tcp_resource, "soak job night-soak-001")
    busy = client.post("/api/v1/measure", json={"plan": "patch-station", "serial": GOOD[0],
                                                 "wait_s": 0.2})
    assert busy.status_code == 409
    doc = validate(busy.json(), "measure")
    assert doc["exit_code"] == 2
    assert "is busy: held by soak job night-soak-001 (since " in doc["error"]
    assert "waited 0.2 s" in doc["error"]
    service.instruments.release(sim.tcp_resource)
    assert client.post("/api/v1/measure", json={"plan": "patch-station",
                                                "serial": GOOD[0]}).status_code == 200


@pytest.mark.parametrize(("body", "status", "words"), [
    ({"plan": "patch-station", "serial": "PA/0001"}, 422, "holds a path separator"),
    ({"plan": "patch-station", "serial": ".."}, 422, "holds '..'"),
    ({"plan": "../../etc/passwd", "serial": "PA-0001"}, 422, "plan: String should match"),
    ({"plan": "no-such-plan", "serial": "PA-0001"}, 404, "no such plan in"),
    ({"plan": "patch-station", "serial": "PA-0001", "colour": "red"}, 422,
     "colour: Extra inputs are not permitted"),
    ({"plan": "patch-station", "serial": "PA-0001", "wait_s": -1}, 422, "wait_s: Input "
     "should be greater than or equal to 0"),
    ({"plan": "patch-station", "serial": "x" * 500}, 422, "serial: String should have at "
     "most 128 characters"),
])
def test_bad_requests_get_one_line_4xx(world, body, status, words) -> None:
    client, _, opener = world
    answer = client.post("/api/v1/measure", json=body)
    assert answer.status_code == status, answer.text
    assert words in answer.json()["error"]
    assert "\n" not in answer.json()["error"]
    assert opener.opened == 0  # refused before the instrument was touched


def test_malformed_and_huge_bodies(world) -> None:
    client, _, _ = world
    bad = client.post("/api/v1/measure", content=b"{not json",
                      headers={"content-type": "application/json"})
    assert bad.status_code == 400 and one_line(bad).startswith("body: not valid JSON at byte 1")
    huge = client.post("/api/v1/measure", content=b"{" + b" " * 70_000 + b"}",
                       headers={"content-type": "application/json"})
    assert huge.status_code == 413 and "over 65536 bytes" in one_line(huge)


def test_soak_jobs_through_the_api(world, tmp_path) -> None:
    client, _, _ = world
    made = client.post("/api/v1/jobs", json={"plan": "night-soak"})
    assert made.status_code == 201, made.text
    job = made.json()["job"]
    assert job == "soak-test-001" and made.json()["message"].startswith("submitted")
    view = validate(client.get("/api/v1/jobs").json(), "status")
    assert [j["id"] for j in view["jobs"]] == [job]
    one = validate(client.get(f"/api/v1/jobs/{job}").json(), "status")
    assert one["jobs"][0]["state"] == "queued"
    never = client.get(f"/api/v1/jobs/{job}/report")
    assert never.status_code == 409 and "never ran" in one_line(never)
    stop = client.post(f"/api/v1/jobs/{job}/cancel", json={})
    assert stop.status_code == 200 and "cancel" in stop.json()["message"]
    assert client.get("/api/v1/jobs/nothing-001").status_code == 404
    assert client.get("/api/v1/jobs/..%2F..%2Fetc").status_code in (404, 422)


def test_summary_and_overview_show_what_was_measured(world, sim) -> None:
    client, _, _ = world
    sim.bench.select_unit(GOOD[2])
    client.post("/api/v1/measure", json={"plan": "patch-station", "serial": GOOD[2]})
    summary = validate(client.get("/api/v1/summary", params={"plan": "patch-station"}).json(),
                       "summary")
    assert summary["measurements"] == 1
    overview = client.get("/api/v1/overview").json()
    (station,) = overview["stations"]
    assert station["plan"] == "patch-station"
    assert station["last_units"][0]["serial"] == GOOD[2]
    assert station["last_units"][0]["verdict"] == "pass"
    assert "<title>sweepd - line status</title>" in client.get("/").text


def test_openapi_document_lists_every_endpoint(world) -> None:
    client, _, _ = world
    paths = set(client.get("/openapi.json").json()["paths"])
    assert paths >= {"/api/v1/measure", "/api/v1/jobs", "/api/v1/jobs/{job}",
                     "/api/v1/jobs/{job}/cancel", "/api/v1/jobs/{job}/report",
                     "/api/v1/summary", "/api/v1/overview"}


def test_a_token_guards_everything_but_the_page(tmp_path) -> None:
    token = "s3cret-token-for-tests"
    service = Service(PlanBook(tmp_path), tmp_path / "spool", Instruments(), token=token,
                      daemon_here=False)
    with TestClient(create_app(service)) as client:
        assert client.get("/api/v1/jobs").status_code == 401
        wrong = client.get("/api/v1/jobs", headers={"Authorization": "Bearer nope"})
        assert wrong.status_code == 401 and "token" in one_line(wrong)
        right = client.get("/api/v1/overview", headers={"Authorization": f"Bearer {token}"})
        assert right.status_code == 200
        assert client.get("/").status_code == 200  # the page holds no data itself


def test_listen_rules(tmp_path) -> None:
    assert parse_listen("127.0.0.1:8350").loopback
    assert parse_listen("[::1]:0").loopback
    assert not parse_listen("0.0.0.0:8350").loopback
    with pytest.raises(AccessError, match="give HOST:PORT"):
        parse_listen("8350")
    with pytest.raises(AccessError, match="not a loopback address; serving other machines "
                       "needs --token-file"):
        check_access(parse_listen("0.0.0.0:8350"), None)
    token = tmp_path / "token"
    token.write_text("a-long-enough-token-value\n")
    token.chmod(0o644)
    with pytest.raises(AccessError, match=r"readable by others \(mode 0644\); chmod 600"):
        check_access(parse_listen("0.0.0.0:8350"), token)
    token.chmod(0o600)
    assert check_access(parse_listen("0.0.0.0:8350"), token) == "a-long-enough-token-value"
    short = tmp_path / "short"
    short.write_text("abc")
    os.chmod(short, 0o600)
    with pytest.raises(AccessError, match="at least 16 characters"):
        check_access(parse_listen("127.0.0.1:1"), short)
    assert json.dumps(check_access(parse_listen("localhost:1"), None)) == "null"


def test_lot_and_operator_are_recorded_and_checked(world, sim, tmp_path) -> None:
    from acquire.journal import journal_in

    client, _, _ = world
    sim.bench.select_unit(GOOD[0])
    done = client.post("/api/v1/measure", json={"plan": "patch-station", "serial": GOOD[0],
                                                 "lot": "LOT-2026-12", "operator": "Ana K"})
    assert done.status_code == 200, done.text
    run_id = done.json()["journal"]["run_id"]
    with journal_in(tmp_path / "out", read_only=True) as journal:
        run = journal.run(run_id)
    assert (run["lot"], run["operator"]) == ("LOT-2026-12", "Ana K")
    bad = client.post("/api/v1/measure", json={"plan": "patch-station", "serial": GOOD[0],
                                                "lot": "../etc"})
    assert bad.status_code == 422 and "lot must be 1-64 letters" in one_line(bad)
