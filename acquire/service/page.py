"""The read-only status page: one HTML file that fetches the overview and redraws itself.

Plain and readable: black text on white, verdicts written out in words as well as
marked, no colour needed to read it. With a token, open the page as ``/#token=TOKEN``:
the script sends it with every request and never puts it in a URL it fetches.
"""

from __future__ import annotations

import threading
import time
from typing import Any

from fastapi import FastAPI, Path
from fastapi.responses import HTMLResponse, JSONResponse, Response

from acquire.service.models import JOB_ID
from acquire.service.statuses import REFUSED

REFRESH_S = 2.0
PICTURE_TTL_S = 5.0


def add_page(app: FastAPI, service: Any) -> None:
    pictures = _PictureCache()

    @app.get("/", response_class=HTMLResponse, include_in_schema=False)
    def page() -> HTMLResponse:
        return HTMLResponse(PAGE.replace("{{REFRESH_MS}}", str(int(REFRESH_S * 1000))))

    @app.get("/api/v1/overview", responses=REFUSED)
    def overview_json() -> JSONResponse:
        from acquire.service.overview import overview

        return JSONResponse(overview(service))

    @app.get("/jobs/{job}/drift.png", response_class=Response,
             responses={200: {"content": {"image/png": {}}}, **REFUSED})
    def drift(job: str = Path(pattern=JOB_ID, max_length=101)) -> Response:
        found = service.spool().require().find(job)
        return Response(pictures.get(found), media_type="image/png",
                        headers={"Cache-Control": "no-store"})


class _PictureCache:
    """Drift pictures rendered at most every few seconds per job."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._made: dict[str, tuple[float, bytes]] = {}

    def get(self, job: Any) -> bytes:
        from acquire.soak.report import drift_png

        now = time.monotonic()
        with self._lock:
            hit = self._made.get(job.id)
            if hit is not None and now - hit[0] < PICTURE_TTL_S:
                return hit[1]
        data = drift_png(job)
        with self._lock:
            self._made[job.id] = (now, data)
        return data


PAGE = """<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>sweepd - line status</title>
<style>
body { font-family: system-ui, sans-serif; margin: 1.5em auto; max-width: 1150px;
       color: #111; background: #fff; line-height: 1.35; }
h1 { font-size: 1.4em; margin-bottom: 0.2em; }
h2 { font-size: 1.15em; border-bottom: 1px solid #999; padding-bottom: 0.2em; }
.muted { color: #555; }
section.card { border: 1px solid #bbb; padding: 0.6em 0.9em; margin: 0.8em 0; }
table { border-collapse: collapse; }
td, th { padding: 0.15em 0.7em 0.15em 0; text-align: left; vertical-align: top; }
.verdict { font-weight: bold; }
.stopped { border: 3px solid #111; padding: 0.3em 0.6em; font-weight: bold; }
progress { width: 18em; }
img.drift { max-width: 100%; border: 1px solid #ddd; margin-top: 0.5em; }
</style></head>
<body>
<h1>sweepd - line status</h1>
<p class="muted">Updated <span id="updated">never</span>; refreshes every
{{REFRESH_MS}} ms. <span id="problem"></span></p>
<h2>Stations</h2><div id="stations"><p class="muted">loading...</p></div>
<h2>Soak jobs</h2><div id="jobs"><p class="muted">loading...</p></div>
<script>
"use strict";
const token = new URLSearchParams(location.hash.slice(1)).get("token");
const headers = token ? {"Authorization": "Bearer " + token} : {};
const shownPictures = {};

function el(tag, text, cls) {
  const node = document.createElement(tag);
  if (text !== undefined && text !== null) node.textContent = String(text);
  if (cls) node.className = cls;
  return node;
}

function row(cells) {
  const tr = el("tr");
  cells.forEach(c => tr.appendChild(el("td", c)));
  return tr;
}

function station(s) {
  const card = el("section", null, "card");
  card.dataset.plan = s.plan;
  card.appendChild(el("h3", s.plan + (s.description ? " - " + s.description : "")));
  if (s.line.stopped) {
    card.appendChild(el("p", "LINE STOPPED: " + s.line.reason, "stopped"));
  } else if (s.line.due) {
    card.appendChild(el("p", "Golden check due: " + s.line.due_reason, "stopped"));
  } else if (s.line.golden) {
    card.appendChild(el("p", "Line running; last good golden check " +
                         (s.line.last_good_utc || "none")));
  }
  const y = s.yield || {};
  card.appendChild(el("p", "Tested " + (y.tested ?? 0) + ", passed " + (y.passed ?? 0) +
                      ", failed " + (y.failed ?? 0) + ", retests " + (y.retests ?? 0) +
                      (y.first_pass_yield != null ? ", first-pass yield " +
                       (100 * y.first_pass_yield).toFixed(1) + " %" : "")));
  const table = el("table");
  const head = el("tr");
  ["serial", "verdict", "time (UTC)", "worst margin"].forEach(h => head.appendChild(el("th", h)));
  table.appendChild(head);
  s.last_units.forEach(u => {
    const tr = row([u.serial + (u.golden ? " (golden)" : ""), u.verdict.toUpperCase(),
                    u.time_utc.replace("T", " ").replace("Z", ""),
                    u.worst_margin == null ? "-" : u.worst_margin.toPrecision(4)]);
    tr.children[1].className = "verdict";
    tr.dataset.serial = u.serial;
    table.appendChild(tr);
  });
  card.appendChild(table);
  return card;
}

function job(j) {
  const card = el("section", null, "card");
  card.dataset.job = j.id;
  card.appendChild(el("h3", j.id + " - " + j.plan + " - " + j.state));
  const p = el("p");
  p.className = "progress";
  p.textContent = "Sweeps done " + j.done + (j.planned ? " of " + j.planned : "") +
                  ", missed " + j.missed + ", alarms " + j.alarms + " ";
  if (j.planned) {
    const bar = el("progress");
    bar.max = j.planned; bar.value = j.done;
    p.appendChild(bar);
  }
  card.appendChild(p);
  card.appendChild(el("p", "Instrument " + j.resource, "muted"));
  if (j.statistics && j.statistics !== "ready") {
    card.appendChild(el("p", "Statistics: " + j.statistics, "muted"));
  }
  if (j.last_fault) card.appendChild(el("p", "Last fault: " + j.last_fault));
  if (j.has_run) {
    const img = el("img", null, "drift");
    img.alt = "drift of " + j.id + " against time";
    card.appendChild(img);
    picture(j.id, img);
  }
  return card;
}

async function picture(id, img) {
  try {
    const answer = await fetch("/jobs/" + encodeURIComponent(id) + "/drift.png", {headers});
    if (!answer.ok) return;
    const url = URL.createObjectURL(await answer.blob());
    if (shownPictures[id]) URL.revokeObjectURL(shownPictures[id]);
    shownPictures[id] = url;
    img.src = url;
  } catch (e) { /* the next refresh tries again */ }
}

function fill(id, items, make, none) {
  const box = document.getElementById(id);
  box.replaceChildren(...(items.length ? items.map(make) : [el("p", none, "muted")]));
}

async function refresh() {
  try {
    const answer = await fetch("/api/v1/overview", {headers});
    const data = await answer.json();
    if (!answer.ok) throw new Error(data.error || answer.statusText);
    fill("stations", data.stations, station, "No station has measured yet.");
    fill("jobs", data.jobs, job, "No soak jobs.");
    document.getElementById("updated").textContent = data.time_utc.replace("T", " ");
    document.getElementById("problem").textContent = "";
  } catch (e) {
    document.getElementById("problem").textContent = "Cannot reach sweepd: " + e.message;
  }
}
refresh();
setInterval(refresh, {{REFRESH_MS}});
</script>
</body></html>
"""
