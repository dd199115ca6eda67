"""Calibration mathematics, cal kits and cal sets.

- ``model``: the one-port 3-term model and response / transmission variants (solve,
  correct, embed), batched over frequency.
- ``standards`` and ``kit``: standard reflections from cal kit models; kit files.
- ``methods``: the registry of calibration methods (one object per method: its standards,
  solve and description; ``methodbase`` is their common base, ``twoport_methods`` the
  full two-port ones), solving them into an ``ErrorModel`` (``errormodel``) that
  corrects sweeps; ``twoport``: the 12-term model (defined and unknown thru).
- ``checks``: plausibility of raw standard readings and of solved terms, in plain words.
- ``residual``: residual error estimates and check-standard verification.
- ``calset``, ``validity``, ``interpolate``: storing, finding, judging and regridding
  cal sets.

Heavy imports (numpy) happen on import of this package; the CLI imports it inside
``run`` only.
"""

from __future__ import annotations

from acquire.calibration.calset import CalSet, read_header
from acquire.calibration.calstore import find_latest, list_calsets
from acquire.calibration.checks import CheckLimits, CheckResult, Finding, check_raw
from acquire.calibration.kit import CalKit, load_kit
from acquire.calibration.methods import (
    ALIASES,
    METHODS,
    CalMethod,
    ErrorModel,
    Method,
    Solution,
    StepSpec,
    canonical_name,
    method,
    solve,
)
from acquire.calibration.model import (
    OnePortFit,
    OnePortTerms,
    TransmissionTerms,
    solve_one_port,
    solve_open_short_average,
    solve_response,
    solve_thru,
    solve_two_term,
)
from acquire.calibration.residual import (
    ResidualEstimate,
    Verification,
    check_tolerance,
    estimate_residuals,
    return_loss_error_range,
    verify_check_standard,
)
from acquire.calibration.standards import Offset, Standard
from acquire.calibration.termchecks import check_terms
from acquire.calibration.twoport import (
    TwelveTerms,
    correct_twelve,
    remove_switch_terms,
    solve_defined_thru,
    solve_unknown_thru,
)
from acquire.calibration.validity import ValidityPolicy, check_validity, prepare, select

__all__ = [
    "ALIASES",
    "METHODS",
    "CalKit",
    "CalMethod",
    "CalSet",
    "CheckLimits",
    "CheckResult",
    "ErrorModel",
    "Finding",
    "Method",
    "Offset",
    "OnePortFit",
    "OnePortTerms",
    "ResidualEstimate",
    "Solution",
    "Standard",
    "StepSpec",
    "TransmissionTerms",
    "TwelveTerms",
    "ValidityPolicy",
    "Verification",
    "canonical_name",
    "check_raw",
    "check_terms",
    "check_tolerance",
    "check_validity",
    "correct_twelve",
    "estimate_residuals",
    "find_latest",
    "list_calsets",
    "load_kit",
    "method",
    "prepare",
    "read_header",
    "remove_switch_terms",
    "return_loss_error_range",
    "select",
    "solve",
    "solve_defined_thru",
    "solve_one_port",
    "solve_open_short_average",
    "solve_response",
    "solve_thru",
    "solve_two_term",
    "solve_unknown_thru",
    "verify_check_standard",
]
