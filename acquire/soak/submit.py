"""Queueing a soak job from a plan, shared by ``sweepd submit`` and the HTTP service."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from acquire.soak.spec import SoakSpec
from acquire.soak.spool import Job, Spool
from acquire.units import format_duration
from drivers.resources import parse_resource


@dataclass(frozen=True)
class Submitted:
    job: Job
    spec: SoakSpec
    resource: str

    def describe(self) -> str:
        """One line: what was queued, on which instrument, how often, where the files go."""
        s = self.spec.schedule
        every = f"every {format_duration(s.every_s)}" if s.every_s > 0 else "back to back"
        extent = (f"{s.count} sweeps" if s.count is not None else
                  f"for {format_duration(s.duration_s)}" if s.duration_s is not None
                  else "until cancelled")
        return (f"submitted {self.job.id}: {self.job.plan_name} on {self.resource}, {every}, "
                f"{extent}; files in {self.job.data_dir}")


def submit_plan(spool: Spool, path: Path, *, resource: str | None = None,
                output: Path | None = None) -> Submitted:
    """Validate a soak plan (and its reference file) and queue it in ``spool``."""
    from acquire.plan import load_plan
    from acquire.soak.drift import reference_from_file
    from acquire.soak.spec import parse_soak

    plan = load_plan(path)
    spec = parse_soak(plan)
    if spec.reference is not None:  # readable, has the parameter, covers the sweep
        reference_from_file(spec.reference, spec.parameter, spec.band_hz,
                            plan.stimulus.frequencies())
    resource = resource or plan.instrument.resource
    parse_resource(resource, where="--resource")
    out = Path(output or plan.output.dir).expanduser().resolve()
    job = spool.create_job(plan.name, path.resolve(), path.read_text(encoding="utf-8"),
                           out, resource)
    return Submitted(job, spec, resource)
