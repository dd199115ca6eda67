"""Calibration mathematics, cal kits and cal sets.

- ``model``: the one-port 3-term model and response / transmission variants (solve,
  correct, embed), batched over frequency.
- ``standards`` and ``kit``: standard reflections from cal kit models; kit files.
- ``methods``: named methods (one-port, response-open, thru-response, ...), solving them
  into an ``ErrorModel`` that corrects sweeps.
- ``checks``: plausibility of raw standard readings and of solved terms, in plain words.
- ``residual``: residual error estimates and check-standard verification.
- ``calset``, ``validity``, ``interpolate``: storing, finding, judging and regridding
  cal sets.

Heavy imports (numpy) happen on import of this package; the CLI imports it inside
``run`` only.
"""

from __future__ import annotations

from acquire.calibration.calset import CalSet, find_latest, list_calsets, read_header
from acquire.calibration.checks import CheckLimits, CheckResult, Finding, check_raw, check_terms
from acquire.calibration.kit import CalKit, load_kit
from acquire.calibration.methods import METHODS, ErrorModel, Method, Solution, method, solve
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
from acquire.calibration.validity import ValidityPolicy, check_validity, prepare, select

__all__ = [
    "METHODS", "CalKit", "CalSet", "CheckLimits", "CheckResult", "ErrorModel", "Finding",
    "Method", "Offset", "OnePortFit", "OnePortTerms", "ResidualEstimate", "Solution",
    "Standard", "TransmissionTerms", "ValidityPolicy", "Verification", "check_raw",
    "check_terms", "check_tolerance", "check_validity", "estimate_residuals", "find_latest",
    "list_calsets", "load_kit", "method", "prepare", "read_header", "return_loss_error_range",
    "select", "solve", "solve_one_port", "solve_open_short_average", "solve_response",
    "solve_thru", "solve_two_term", "verify_check_standard",
]
