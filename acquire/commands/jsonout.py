"""One JSON object on stdout for every outcome of a command run with ``--json``.

A command's normal result is its own document (verdict, capture, status, ...). When it
fails instead, ``--json`` still prints exactly one object, the error document
(``configs/schemas/error.schema.json``), and the one-line message still goes to stderr:

    {"format": "sweepd-error", "version": 1, "command": "run", "exit_code": 2,
     "kind": "CalError", "error": "no calibration for plan ..."}

Exit codes: 2 error (user input, instrument, disk), 130 interrupted.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Callable

ERROR_FORMAT = "sweepd-error"
ERROR_VERSION = 1
EXIT_ERROR, EXIT_INTERRUPTED = 2, 130


def error_document(command: str, message: str, kind: str, exit_code: int = EXIT_ERROR) -> dict:
    """The error layout every ``--json`` command prints when it cannot give its result."""
    return {"format": ERROR_FORMAT, "version": ERROR_VERSION, "command": command,
            "exit_code": exit_code, "kind": kind, "error": message}


def run_with_json_errors(args: argparse.Namespace, command: str,
                         body: Callable[[], int]) -> int:
    """Run ``body``; with ``--json``, turn a failure into the error document (else the
    exception goes on to the CLI, which prints the one line)."""
    from drivers.errors import SweepdError

    if not getattr(args, "json", False):
        return body()
    try:
        return body()
    except SweepdError as exc:
        return _fail(command, str(exc), type(exc).__name__, EXIT_ERROR)
    except KeyboardInterrupt:
        return _fail(command, "interrupted", "Interrupted", EXIT_INTERRUPTED)
    except BrokenPipeError:
        return EXIT_ERROR
    except OSError as exc:  # disk full, permissions
        where = f" ({exc.filename})" if exc.filename else ""
        return _fail(command, f"{exc.strerror or exc}{where}", "OSError", EXIT_ERROR)
    except Exception as exc:  # unforeseen: still one document, exit 2 (never 1)
        from acquire.errors import internal_error_text

        return _fail(command, internal_error_text(exc), "InternalError", EXIT_ERROR)


def _fail(command: str, message: str, kind: str, code: int) -> int:
    from drivers.yamlnode import one_line

    message = one_line(message)
    print(json.dumps(error_document(command, message, kind, code)), flush=True)
    prefix = "sweepd: interrupted" if code == EXIT_INTERRUPTED else f"sweepd: error: {message}"
    print(prefix, file=sys.stderr)
    return code
