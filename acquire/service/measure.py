"""One unit through the service: the same path and document as ``sweepd measure --json``,
on a session the service keeps open, holding the instrument for the unit."""

from __future__ import annotations

import logging
from typing import Any

from acquire.service.models import MeasureRequest
from drivers.errors import InstrumentError, SweepdError

log = logging.getLogger(__name__)


def measure_unit(service: Any, body: MeasureRequest) -> tuple[int, dict[str, Any]]:
    """(HTTP status, measure document) for one request; never raises a ``SweepdError``."""
    from acquire.journal.labels import check_lot, check_operator
    from acquire.service.statuses import status_for
    from acquire.station.measure import Request, measure_one, result_dict, unit_serial
    from drivers.resources import resource_problem

    plan_name = body.plan
    try:
        plan = service.plans.load(body.plan)
        plan_name = plan.name
        resource = body.resource or plan.instrument.resource
        problem = resource_problem(resource)
        if problem is not None:
            from acquire.errors import PlanError

            raise PlanError(f"resource: {problem}")
        request = Request(serial=body.serial, golden=body.golden, resource=resource,
                          station_id=body.station,
                          operator=check_operator(body.operator, "operator"),
                          lot=check_lot(body.lot, "lot"))
        unit_serial(plan, request)  # refused before the instrument is touched
        who = "measurement of the golden unit" if body.golden else \
            f"measurement of unit {body.serial or '(no serial)'}"
        with service.instruments.hold(resource, who, body.wait_s):
            try:
                session = service.instruments.session(plan, resource)
                outcome = measure_one(plan, request, session=session)
            except InstrumentError:
                service.instruments.discard(resource)  # reopened on the next call
                raise
    except SweepdError as exc:
        log.info("measure %s %s: %s", plan_name, body.serial or "", exc)
        return status_for(exc), result_dict(None, plan=plan_name, serial=body.serial,
                                            error=" ".join(str(exc).split()))
    return 200, result_dict(outcome)
