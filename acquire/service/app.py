"""The HTTP API and status page (FastAPI; the OpenAPI document is at ``/openapi.json``).

    POST /api/v1/measure              one unit (the ``sweepd measure --json`` document)
    GET  /api/v1/jobs                 soak jobs (the ``sweepd status --json`` document)
    POST /api/v1/jobs                 submit a soak job
    GET  /api/v1/jobs/{job}           one job's status
    POST /api/v1/jobs/{job}/cancel    stop a job after the sweep in flight
    GET  /api/v1/jobs/{job}/report    write the morning report, return where it is
    GET  /api/v1/summary?plan=P       yield and capability for a plan's output folder
    GET  /api/v1/overview             what the status page shows
    GET  /                            the status page (refreshes itself)
    GET  /jobs/{job}/drift.png        a job's drift picture

Refusals are 4xx with ``{"error": "one line"}``: 400 malformed JSON, 401 missing token,
404 unknown plan or job, 409 busy instrument or stopped line, 413 body over 64 KiB, 422 a
field the plan or schema refuses. A measurement answers 200 with the measure document for
a verdict (``exit_code`` 0 or 1) and 502 with the same document (``exit_code`` 2) when the
instrument failed.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fastapi import FastAPI, Query, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse, Response
from starlette.exceptions import HTTPException as StarletteHTTPException

from acquire.instruments import Instruments
from acquire.service.access import token_matches
from acquire.service.models import JOB_ID, CancelRequest, MeasureRequest, SubmitRequest
from acquire.service.plans import PLAN_NAME, PlanBook
from acquire.service.statuses import REFUSED, status_for
from drivers.errors import SweepdError

log = logging.getLogger(__name__)
MAX_BODY = 64 * 1024


@dataclass
class Service:
    """What the application serves."""

    plans: PlanBook
    spool_root: Path | None
    instruments: Instruments
    token: str | None = None
    daemon_here: bool = True  # the soak daemon runs in this process

    def spool(self) -> Any:
        from acquire.soak.spool import Spool

        return Spool(self.spool_root)


def problem(status: int, text: str) -> JSONResponse:
    return JSONResponse({"error": " ".join(str(text).split())}, status_code=status)


def create_app(service: Service) -> FastAPI:
    from importlib.metadata import PackageNotFoundError, version

    try:
        release = version("sweepd")
    except PackageNotFoundError:  # running from a checkout that is not installed
        release = "unknown"
    app = FastAPI(title="sweepd measurement service", version=release,
                  description="Measure units, run soak jobs and watch a line.")
    app.state.service = service
    _guards(app, service)
    _api(app, service)
    from acquire.service.page import add_page

    add_page(app, service)
    return app


def _guards(app: FastAPI, service: Service) -> None:
    @app.middleware("http")
    async def limits(request: Request, call_next: Any) -> Response:
        if service.token is not None and request.url.path != "/" and not token_matches(
                request.headers.get("authorization"), service.token):
            return problem(401, "missing or wrong token (Authorization: Bearer TOKEN)")
        length = request.headers.get("content-length")
        if length is not None and (not length.isdigit() or int(length) > MAX_BODY):
            return problem(413, f"request body over {MAX_BODY} bytes")
        if request.method in ("POST", "PUT", "PATCH"):
            body = await request.body()  # read once, bounded by the length check above
            if len(body) > MAX_BODY:
                return problem(413, f"request body over {MAX_BODY} bytes")
        return await call_next(request)

    @app.exception_handler(RequestValidationError)
    async def invalid(_request: Request, exc: RequestValidationError) -> JSONResponse:
        first = exc.errors()[0] if exc.errors() else {"loc": (), "msg": "invalid request"}
        if first.get("type") == "json_invalid":
            at = first.get("loc", ("body", "?"))[-1]
            why = (first.get("ctx") or {}).get("error", "JSON decode error")
            return problem(400, f"body: not valid JSON at byte {at}: {why}")
        where = ".".join(str(p) for p in first.get("loc", ()) if p != "body") or "body"
        return problem(422, f"{where}: {first.get('msg', 'invalid')}")

    @app.exception_handler(StarletteHTTPException)
    async def http_error(_request: Request, exc: StarletteHTTPException) -> JSONResponse:
        return problem(exc.status_code, str(exc.detail))

    @app.exception_handler(SweepdError)
    async def refused(_request: Request, exc: SweepdError) -> JSONResponse:
        return problem(status_for(exc), str(exc))


def _api(app: FastAPI, service: Service) -> None:
    @app.post("/api/v1/measure", responses={**REFUSED, 502: {"description": "instrument "
              "failed; the measure document with exit_code 2"}})
    def measure(body: MeasureRequest) -> JSONResponse:
        from acquire.service.measure import measure_unit

        status, document = measure_unit(service, body)
        return JSONResponse(document, status_code=status)

    @app.get("/api/v1/jobs", responses=REFUSED)
    def jobs() -> JSONResponse:
        from acquire.soak.status import spool_view

        return JSONResponse(_with_daemon(spool_view(service.spool()), service))

    @app.post("/api/v1/jobs", status_code=201, responses=REFUSED)
    def submit(body: SubmitRequest) -> JSONResponse:
        from acquire.soak.submit import submit_plan

        spool = service.spool()
        spool.ensure()
        done = submit_plan(spool, service.plans.path(body.plan), resource=body.resource)
        return JSONResponse({"job": done.job.id, "spool": str(spool.root),
                             "resource": done.resource, "data_dir": str(done.job.data_dir),
                             "message": done.describe()}, status_code=201)

    @app.get("/api/v1/jobs/{job}", responses=REFUSED)
    def job_status(job: str = _job_path()) -> JSONResponse:
        from acquire.soak.status import spool_view

        spool = service.spool().require()
        return JSONResponse(_with_daemon(spool_view(spool, [spool.find(job)]), service))

    @app.post("/api/v1/jobs/{job}/cancel", responses=REFUSED)
    def cancel(body: CancelRequest, job: str = _job_path()) -> JSONResponse:
        from acquire.soak.cancel import cancel_job

        spool = service.spool().require()
        found = spool.find(job)
        return JSONResponse({"job": found.id, "message": cancel_job(
            spool, found, body.wait_s, daemon_here=service.daemon_here)})

    @app.get("/api/v1/jobs/{job}/report", responses=REFUSED)
    def report(job: str = _job_path()) -> JSONResponse:
        from acquire.soak.report import report_document, write_report

        found = service.spool().require().find(job)
        return JSONResponse(report_document(found, write_report(found,
                                                                found.data_dir / "report")))

    @app.get("/api/v1/summary", responses=REFUSED)
    def summary(plan: str = Query(pattern=PLAN_NAME, max_length=80)) -> JSONResponse:
        from acquire.station.summary import load_selection

        loaded = service.plans.load(plan)
        return JSONResponse(load_selection(loaded.output.dir, plan=loaded.name).to_dict())


def _job_path() -> Any:
    from fastapi import Path as PathParam

    return PathParam(pattern=JOB_ID, max_length=101)


def _with_daemon(view: dict[str, Any], service: Service) -> dict[str, Any]:
    """The status document as seen from inside the daemon (it runs: it is answering)."""
    if service.daemon_here:
        import os

        view["daemon"] = {"running": True, "pid": os.getpid()}
    return view
