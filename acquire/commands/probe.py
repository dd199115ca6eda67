"""``sweepd probe [RESOURCE] [--json]``: what is out there, and what is this instrument?

Without a resource: the resources pyvisa-py can list on this computer's own buses (serial
ports, and USB-TMC when pyusb is installed). LAN instruments are looked for only with
``--lan``, because that sends a VXI-11 broadcast (and an mDNS query when zeroconf is
installed) to the local network; otherwise give their resource string.

With a resource: open it, read the identity (``*IDN?``, IEEE Std 488.2), then try each
shipped dialect with queries only (nothing is changed on the instrument): its error query
first, which also drains and shows what the error queue held, then every query the
dialect would use to read settings and data formats. A dialect matches when every one of
its queries is answered and the error queue stays empty.

Exit codes: 0 the instrument answered (whether or not a dialect matches), 2 error.
"""

from __future__ import annotations

import argparse
from dataclasses import dataclass, field
from typing import Any

DEFAULT_TIMEOUT_S = 2.0


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("resource", nargs="?", help="VISA resource string to identify")
    parser.add_argument("--lan", action="store_true",
                        help="also look for LAN instruments (sends a VXI-11 broadcast)")
    parser.add_argument("--timeout", type=float, default=DEFAULT_TIMEOUT_S, metavar="S",
                        help=f"seconds to wait for each reply (default {DEFAULT_TIMEOUT_S:g})")
    parser.add_argument("--json", action="store_true", help="print one JSON object")


def run(args: argparse.Namespace) -> int:
    import json

    from acquire.commands.jsonout import run_with_json_errors

    def body() -> int:
        report = identify(args.resource, args.timeout) if args.resource else listing(args.lan)
        if args.json:
            print(json.dumps(report, indent=2))
        else:
            print(render(report))
        return 0

    return run_with_json_errors(args, "probe", body)


# -- listing ---------------------------------------------------------------------------
def listing(lan: bool) -> dict[str, Any]:
    """Resources pyvisa-py lists, bus by bus; LAN discovery only when asked."""
    import warnings

    from drivers.visaopen import resource_manager

    resource_manager()  # registers pyvisa-py's session classes
    from pyvisa import constants
    from pyvisa_py.sessions import Session

    found: list[str] = []
    notes: list[str] = []
    for (interface, _kind), cls in Session.iter_valid_session_classes():
        if interface == constants.InterfaceType.tcpip and not lan:
            continue
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                found += cls.list_resources()
            except Exception as exc:  # a bus whose support library misbehaves
                notes.append(f"{interface.name}: {' '.join(str(exc).split())}")
        notes += [" ".join(str(w.message).split()) for w in caught]
    if not lan:
        notes.append("LAN instruments are not searched for without --lan; "
                     "give TCPIP::<host>::... to probe one")
    return {"resources": sorted(set(found)), "notes": notes}


# -- one instrument --------------------------------------------------------------------
@dataclass
class Trial:
    """One shipped dialect tried against the instrument."""

    name: str
    matches: bool = False
    detail: str = ""
    answered: list[str] = field(default_factory=list)


def identify(resource: str, timeout_s: float) -> dict[str, Any]:
    """Identity, error queue and the matching shipped dialect of ``resource``."""
    from drivers.dialect import DIALECT_DIR, load_dialect
    from drivers.transport import Transport

    dialects = [load_dialect(p.stem) for p in sorted(DIALECT_DIR.glob("*.yaml"))]
    transport = Transport(resource, timeout_s=timeout_s, connect_timeout_s=max(timeout_s, 2))
    transport.open()
    try:
        transport.clear_input()
        idn, idn_query = _identity_reply(transport, dialects)
        errors, error_query, tried = _drain_first(transport, dialects)
        trials = [_try(transport, d, error_query) for d in dialects]
        transport.write_termination = b"\n"
    finally:
        transport.close()
    match = next((t.name for t in trials if t.matches), None)
    return {
        "resource": resource, "identity": _identity(idn), "identity_query": idn_query,
        "error_queue": errors,
        "error_query": error_query[0] if error_query else None,
        "error_queue_note": (f"may include errors caused by the probe's own tries of {tried}"
                             if tried else ""),
        "dialects": [{"name": t.name, "matches": t.matches, "detail": t.detail}
                     for t in trials],
        "match": match,
    }


def _identity_reply(transport: Any, dialects: list[Any]) -> tuple[str | None, str | None]:
    """``*IDN?`` (IEEE Std 488.2), else the first shipped dialect's own identity query."""
    for query in dict.fromkeys(["*IDN?", *(d.identity.text for d in dialects)]):
        reply = _ask(transport, query)
        if reply is not None:
            return reply.strip("\"'"), query
    return None, None


def _ask(transport: Any, command: str) -> str | None:
    """The reply to a query, or None when none came (or the link hiccupped)."""
    from drivers.errors import BlockError, InstrumentTimeout, ReplyError

    try:
        return transport.query(command).strip()
    except (InstrumentTimeout, ReplyError, BlockError):
        return None


def _drain(transport: Any, query: str, none_code: int, limit: int = 64
           ) -> list[tuple[int, str]] | None:
    """Entries of the error queue read with ``query``; None if it is not this query."""
    from drivers.errors import ReplyError
    from drivers.replies import parse_error_entry

    entries: list[tuple[int, str]] = []
    for _ in range(limit):
        reply = _ask(transport, query)
        if reply is None:
            return None
        try:
            code, text = parse_error_entry(reply, query)
        except ReplyError:
            return None
        if code == none_code:
            return entries
        entries.append((code, text))
    return entries


def _drain_first(transport: Any, dialects: list[Any]
                 ) -> tuple[list[tuple[int, str]], tuple[str, int] | None, list[str]]:
    """Drain the queue with the first dialect error query that works:
    (entries, (query, none code) or None, the queries tried before it)."""
    tried: list[str] = []
    for dialect in dialects:
        query = dialect.error_query.text
        entries = _drain(transport, query, dialect.error_none_code)
        if entries is not None:
            return entries, (query, dialect.error_none_code), tried
        tried.append(query)
    return [], None, tried


def _try(transport: Any, dialect: Any, errors: tuple[str, int] | None) -> Trial:
    """Ask every query of ``dialect``; it matches when all are answered cleanly."""
    trial = Trial(dialect.name)
    transport.write_termination = dialect.write_termination.encode("ascii")
    queries = [dialect.identity.text, dialect.error_query.text]
    queries += [spec.query.text for spec in dialect.settings.values()]
    queries += [t.text for t in (dialect.format_query, dialect.sweep_time_query) if t]
    for query in dict.fromkeys(queries):
        answered = _ask(transport, query) is not None
        entries = _drain(transport, *errors) if errors else []
        if not answered:
            trial.detail = f"no reply to '{query}'"
            return trial
        if entries:
            code, text = entries[0]
            trial.detail = f"'{query}' raised {code} \"{text}\""
            return trial
        trial.answered.append(query)
    trial.matches = True
    trial.detail = f"all {len(trial.answered)} queries answered, no error queued"
    return trial


def _identity(reply: str | None) -> dict[str, str] | None:
    if reply is None:
        return None
    separator = "," if reply.count(",") >= reply.count("/") else "/"
    fields = [part.strip() for part in reply.split(separator)]
    names = ("maker", "model", "serial", "firmware")
    out = {"raw": reply}
    if len(fields) == 4:
        out.update(zip(names, fields, strict=True))
    return out


# -- output ----------------------------------------------------------------------------
def render(report: dict[str, Any]) -> str:
    """The report for a person."""
    if "resources" in report:
        lines = [f"{len(report['resources'])} resource(s) found"]
        lines += [f"  {r}" for r in report["resources"]]
        lines += [f"note: {n}" for n in report["notes"]]
        return "\n".join(lines)
    idn = report["identity"]
    lines = [f"instrument {report['resource']}",
             f"  identity ({report['identity_query']}): {idn['raw']}" if idn else
             "  identity: no reply to *IDN? nor to any shipped dialect's identity query"]
    if idn and "maker" in idn:
        lines.append(f"    maker {idn['maker']}, model {idn['model']}, serial {idn['serial']}, "
                     f"firmware {idn['firmware']}")
    if report["error_query"] is None:
        lines.append("  error queue: no shipped dialect's error query was answered")
    else:
        entries = report["error_queue"]
        shown = "; ".join(f'{c} "{t}"' for c, t in entries) if entries else "empty"
        lines.append(f"  error queue ({report['error_query']}): {shown}")
        if report["error_queue_note"]:
            lines.append(f"    ({report['error_queue_note']})")
    for trial in report["dialects"]:
        mark = "matches" if trial["matches"] else "no"
        lines.append(f"  dialect {trial['name']}: {mark} ({trial['detail']})")
    lines.append(f"  use: instrument.dialect: {report['match']}" if report["match"] else
                 "  no shipped dialect matches: write one (configs/dialects/README.md, "
                 "'Bring up a new instrument')")
    return "\n".join(lines)
