"""Request bodies of the HTTP API: every field typed and bounded, unknown fields refused."""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict, Field

from acquire.service.plans import PLAN_NAME

RESOURCE = r"^[A-Za-z0-9:._,\[\]-]{1,200}$"  # the VISA forms; the plan rules check it again
JOB_ID = r"^[A-Za-z0-9][A-Za-z0-9._-]{0,100}$"
STATION = r"^[A-Za-z0-9][A-Za-z0-9._-]{0,39}$"
MAX_WAIT_S = 300.0


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", str_strip_whitespace=False)


class MeasureRequest(_Strict):
    """One unit on a plan, as ``sweepd measure PLAN --serial X`` (or ``--golden``)."""

    plan: str = Field(pattern=PLAN_NAME, description="plan name in the served folder")
    serial: str | None = Field(None, min_length=1, max_length=128,
                               description="the unit's serial, checked against the plan")
    golden: bool = Field(False, description="measure the plan's golden unit instead")
    resource: str | None = Field(None, pattern=RESOURCE,
                                 description="VISA resource; overrides the plan's")
    station: str | None = Field(None, pattern=STATION, description="station id recorded")
    operator: str | None = Field(None, min_length=1, max_length=64,
                                 description="operator recorded with the run")
    lot: str | None = Field(None, min_length=1, max_length=64,
                            description="production lot recorded with the run")
    wait_s: float = Field(10.0, ge=0.0, le=MAX_WAIT_S,
                          description="how long to wait for a busy instrument")


class SubmitRequest(_Strict):
    """A soak job from a plan with ``schedule:`` and ``soak:`` sections."""

    plan: str = Field(pattern=PLAN_NAME)
    resource: str | None = Field(None, pattern=RESOURCE)


class CancelRequest(_Strict):
    wait_s: float = Field(0.0, ge=0.0, le=60.0)


class Problem(BaseModel):
    """Every refusal and error: one line saying why."""

    error: str
