"""The guided calibration procedure behind ``sweepd calibrate``.

- ``start``: builds a run from a plan and options (``calibrate(plan, Options(...))``).
- ``procedure``: the step cursor: prompt, measure, check, solve, verify, save.
- ``steps``: which standards a method measures and what each step reads.
- ``backends``: who answers prompts (terminal, unattended, scripted technician).
- ``connectors``: how standards reach the port (by hand, external command, analyzer switch).
- ``judge``: plausibility checks in plain words; ``verify``: the check-standard step.
- ``partial``: the unfinished-calibration file a run can resume from.
- ``keys``, ``progress``, ``console``: answers, the progress line, plain line output.

Importing this package imports numpy; the CLI imports it inside ``run`` only.
"""

from __future__ import annotations

from acquire.guided.procedure import Aborted, Outcome
from acquire.guided.start import Options, calibrate

__all__ = ["Aborted", "Options", "Outcome", "calibrate"]
