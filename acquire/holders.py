"""Who holds a busy instrument, in words.

An instrument that serves another client refuses a second one with an error entry
(``-300,"Device busy;..."``) and hangs up. The message we show says so in words and
names the sweepd job holding the instrument when one on this computer does: a soak job
that ``sweepd serve`` is running on the same resource (from the spool). Otherwise it
says that another program or computer has the connection.
"""

from __future__ import annotations

import re
from pathlib import Path

_REFUSED = re.compile(r"refused the connection: b?['\"](?P<said>.*?)(?:\\[rn])*['\"]\s*$")
_ENTRY = re.compile(r'^\s*(?P<code>[-+]?\d+)\s*,\s*"(?P<text>[^"]*)"?')


def busy_message(error_text: str, resource: str, spool_root: Path | None = None) -> str | None:
    """The busy-instrument message for a refused connection; None when ``error_text``
    is not a refusal (then the original message stands)."""
    found = _REFUSED.search(error_text)
    if found is None:
        return None
    said = found.group("said").replace("\\'", "'")
    entry = _ENTRY.match(said)
    if entry is not None:
        words = "; ".join(p.strip() for p in entry.group("text").split(";") if p.strip())
        said_text = f'it said "{words}" (error {entry.group("code")})'
    else:
        said_text = f'it said "{_printable(said)}"'
    head = f"instrument {resource} is busy: it is serving another client ({said_text})"
    holder = soak_holder(resource, spool_root)
    if holder is not None:
        return f"{head}. It is held by {holder}"
    return (f"{head}. No sweepd job on this computer holds it: another program or computer "
            "has the connection; close that session or wait, then try again")


def soak_holder(resource: str, spool_root: Path | None = None) -> str | None:
    """The running soak job on ``resource`` in words, or None (no spool, no such job)."""
    from acquire.soak.spool import Spool
    from drivers.errors import SweepdError

    try:
        spool = Spool(spool_root)
        for job in spool.jobs():
            if job.resource.strip().upper() != resource.strip().upper():  # case: same one
                continue
            state = job.read_state()
            if state.get("state") != "running":
                continue
            since = state.get("started_utc") or job.submitted_utc
            pid = spool.daemon_pid()
            by = f"sweepd serve (pid {pid})" if pid else "sweepd serve"
            return (f"soak job {job.id} (plan {job.plan_name}, submitted by "
                    f"{job.submitted_by or 'unknown'}, running since {since} under {by}); "
                    f"wait for it to end or stop it with: sweepd cancel {job.id}")
    except (OSError, SweepdError, ValueError):
        return None
    return None


def _printable(text: str) -> str:
    return "".join(ch if ch.isprintable() else "?" for ch in text)[:80]
