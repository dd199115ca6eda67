"""Property-based fuzzing of the HTTP API from its own OpenAPI document (schemathesis):
every operation, with generated and mutated requests, never answers 5xx for a request
that the instrument never saw, always answers JSON that its schema allows, and refuses
what it must with a one-line reason. Bounded here; ``--long`` runs many more examples.

The plan folder holds one plan that points at a closed local port, so a request that
gets past validation meets a refused connection quickly (an instrument fault: 502).
"""

from __future__ import annotations

import atexit
import shutil
import sys
import tempfile
from pathlib import Path

import schemathesis
from hypothesis import HealthCheck, settings
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_schema_conformance,
    status_code_conformance,
)
from test_station_support import write_plan

from acquire.instruments import Instruments
from acquire.service.app import Service, create_app
from acquire.service.plans import PlanBook

# the suite's --long switch (tests/conftest.py) also lengthens this run; hypothesis needs
# the count when the module is imported, before pytest's options exist
EXAMPLES = 300 if "--long" in sys.argv else 25


def _app(folder: Path):
    folder.mkdir(parents=True, exist_ok=True)
    write_plan(folder, "TCPIP::127.0.0.1::9::SOCKET", name="patch-station.yaml",
               station={"golden": None})
    return create_app(Service(PlanBook(folder), folder / "spool", Instruments(),
                              daemon_here=False))


_FOLDER = Path(tempfile.mkdtemp(prefix="sweepd-fuzz-"))
atexit.register(shutil.rmtree, _FOLDER, ignore_errors=True)
schema = schemathesis.openapi.from_asgi("/openapi.json", _app(_FOLDER))


@schema.parametrize()
@settings(deadline=None, suppress_health_check=list(HealthCheck), max_examples=EXAMPLES,
          derandomize=True)
def test_api_answers_every_request_in_its_contract(case) -> None:
    response = case.call()
    # an instrument that cannot be reached is a 502 by design; anything else 5xx is a bug
    assert response.status_code < 500 or response.status_code == 502, (
        case.path, case.body, response.status_code, response.text)
    kind = response.headers.get("content-type") or ""
    kind = kind[0] if isinstance(kind, list) else kind
    if kind.startswith("application/json"):
        body = response.json()
        if response.status_code >= 400 and isinstance(body, dict) and "error" in body \
                and body["error"] is not None:
            assert "\n" not in body["error"] and body["error"].strip()
    case.validate_response(response, checks=(status_code_conformance,
                                             content_type_conformance,
                                             response_schema_conformance),
                           excluded_checks=())
