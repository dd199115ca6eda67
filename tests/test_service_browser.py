"""The live status page in a real headless browser (Chromium from the distribution,
driven by Playwright): ``sweepd serve --listen`` in its own process with a simulator, a
unit measured through the API a moment earlier shows on the page, and a soak job's
progress advances while the page refreshes itself.

Chromium is a system package (``.ci/run`` installs it). Without it the test is skipped
on a developer's machine, and fails where ``SWEEPD_REQUIRE_BROWSER=1`` (CI) says it must
run.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest
from test_soak_support import soak_plan
from test_station_support import GOOD, install_cal, write_plan

from simulators.server import SimServer

HERE = Path(__file__).resolve().parents[1]
CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
REQUIRED = os.environ.get("SWEEPD_REQUIRE_BROWSER") == "1"
# The flags a headless Chromium needs on a machine with a closed network (it otherwise
# keeps trying to reach its update and sync services).
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
                 "--no-first-run", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync"]

if CHROMIUM is None and REQUIRED:
    pytest.fail("SWEEPD_REQUIRE_BROWSER=1 but no chromium on PATH", pytrace=False)
pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="no chromium on PATH (the CI run "
                                "installs the distribution's package)")


def post(url: str, body: dict) -> dict:
    request = urllib.request.Request(url, data=json.dumps(body).encode(),
                                     headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(request, timeout=30) as answer:
        return json.loads(answer.read())


def wait_for_port(path: Path, proc: subprocess.Popen, timeout: float = 30.0) -> int:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if path.is_file() and path.read_text().strip():
            return int(path.read_text())
        assert proc.poll() is None, "sweepd serve --listen exited early (see serve.log)"
        time.sleep(0.05)
    raise AssertionError("sweepd serve --listen did not start")


@pytest.mark.timeout(180)
def test_page_shows_a_unit_and_a_soak_advancing(tmp_path: Path) -> None:
    from playwright.sync_api import expect, sync_playwright

    with SimServer(time_scale=0.0, noise=False) as sim:
        install_cal(tmp_path / "out")
        write_plan(tmp_path, sim.tcp_resource, name="patch-station.yaml",
                   station={"golden": None})
        # the soak runs on a second simulator, so the station's instrument stays free
        with SimServer(time_scale=0.0, noise=True) as soak_sim:
            soak_plan(tmp_path / "night-soak.yaml", soak_sim.tcp_resource,
                      tmp_path / "soak-out", count=400, every="0.1 s")
            port_file = tmp_path / "port"
            log = (tmp_path / "serve.log").open("w")
            proc = subprocess.Popen(
                [sys.executable, "-m", "acquire.cli", "serve", "--spool",
                 str(tmp_path / "spool"), "--listen", "127.0.0.1:0", "--plans",
                 str(tmp_path), "--port-file", str(port_file), "-q"],
                cwd=HERE, stdout=subprocess.DEVNULL, stderr=log)
            try:
                base = f"http://127.0.0.1:{wait_for_port(port_file, proc)}"
                sim.bench.select_unit(GOOD[1])
                unit = post(f"{base}/api/v1/measure", {"plan": "patch-station",
                                                        "serial": GOOD[1]})
                assert unit["verdict"] == "pass"
                job = post(f"{base}/api/v1/jobs", {"plan": "night-soak"})["job"]
                with sync_playwright() as play:
                    browser = play.chromium.launch(executable_path=CHROMIUM,
                                                   args=CHROMIUM_ARGS)
                    page = browser.new_page()
                    page.goto(base + "/")
                    row = page.locator(f'tr[data-serial="{GOOD[1]}"]')
                    expect(row).to_contain_text("PASS", timeout=15_000)
                    card = page.locator(f'section[data-job="{job}"] p.progress')
                    expect(card).to_contain_text("Sweeps done", timeout=15_000)
                    first = _done(card.inner_text())
                    expect(card).not_to_contain_text(f"Sweeps done {first} ",
                                                     timeout=20_000)
                    later = _done(card.inner_text())
                    assert later > first, (first, later)
                    expect(page.locator(f'section[data-job="{job}"] img.drift')).to_be_visible(
                        timeout=20_000)
                    browser.close()
                post(f"{base}/api/v1/jobs/{job}/cancel", {"wait_s": 5})
            finally:
                proc.terminate()
                proc.wait(30)
                log.close()


def _done(text: str) -> int:
    found = re.search(r"Sweeps done (\d+)", text)
    assert found, text
    return int(found.group(1))
