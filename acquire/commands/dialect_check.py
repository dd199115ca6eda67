"""``sweepd dialect check FILE [--resource R] [--json]``: validate and explain a dialect
file; with a resource, walk every command of it on the instrument (see
``acquire.commands.dialect_walk``) and show, line of the file by line, what was sent, what
came back and what the error queue said. Nothing is left changed on the instrument.

Exit codes: 0 the file is valid (and every command worked), 1 some command failed on the
instrument, 2 the file is invalid or the instrument cannot be reached.
"""

from __future__ import annotations

import argparse
from typing import Any

DEFAULT_TIMEOUT_S = 2.0
SWITCH_WORDS = {"switch.forward": "a2/b2 (port 1 driving)",
                "switch.reverse": "a1/b1 (port 2 driving)"}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    actions = parser.add_subparsers(dest="action", metavar="ACTION", required=True)
    check = actions.add_parser("check", help="validate and explain a dialect file; with "
                               "--resource, try each of its commands on the instrument")
    check.add_argument("file", help="dialect file (YAML) or the name of a shipped one")
    check.add_argument("--resource", help="VISA resource string of the instrument to try")
    check.add_argument("--timeout", type=float, default=DEFAULT_TIMEOUT_S, metavar="S",
                       help=f"seconds to wait for each reply (default {DEFAULT_TIMEOUT_S:g})")
    check.add_argument("--json", action="store_true", help="print one JSON object")
    check.add_argument("--io-log", metavar="FILE",
                       help="append every message sent to and received from the instrument "
                            "to FILE (monotonic times, byte counts)")


def run(args: argparse.Namespace) -> int:
    from acquire.commands.jsonout import run_with_json_errors

    return run_with_json_errors(args, "dialect check", lambda: _check(args))


def _check(args: argparse.Namespace) -> int:
    import json

    from drivers.dialect import load_dialect

    dialect = load_dialect(args.file)
    report: dict[str, Any] = {"dialect": dialect.name, "file": str(dialect.path),
                              "valid": True, "commands": explain(dialect)}
    code = 0
    if args.resource:
        from acquire.commands.dialect_walk import walk

        steps = walk(dialect, args.resource, args.timeout)
        report["resource"] = args.resource
        report["steps"] = [s.as_dict() for s in steps]
        report["failed"] = sum(not s.ok for s in steps)
        code = 1 if report["failed"] else 0
    if args.json:
        print(json.dumps(report, indent=2))
    else:
        print(render(report))
    return code


def explain(dialect: Any) -> list[dict[str, str]]:
    """Every command template of the file with its key path and what sweepd uses it for."""
    from drivers.trace_reader import trace_tokens

    d = dialect
    rows: list[tuple[str, Any, str]] = [
        ("session.identity", d.identity, "asked on opening (IEEE 488.2 identification)"),
        ("session.clear", d.clear, "clears the status on opening"),
        ("session.opc_query", d.opc_query, "waits until pending operations are complete"),
    ]
    rows += [(f"session.opening[{i}]", t, "sent once on opening")
             for i, t in enumerate(d.opening)]
    for name, spec in d.settings.items():
        unit = f" (instrument unit = {spec.scale:g} SI)" if spec.scale != 1.0 else ""
        rows += [(f"settings.{name}.set", t, f"sets {name}{unit}") for t in spec.set]
        rows.append((f"settings.{name}.query", spec.query, f"reads {name} back to verify it"))
        if spec.state_query is not None:
            rows.append((f"settings.{name}.state.query", spec.state_query,
                         f"reads whether {name} is on"))
    rows += [(f"data.formats[{f.encoding}].set", f.set, f"selects {f.encoding} trace data")
             for f in d.formats]
    rows.append(("data.format_query", d.format_query, "reads the data format back"))
    if d.byte_orders is not None:
        rows.append(("data.byte_order.query", d.byte_orders.query, "reads the byte order"))
        for order in ("big", "little"):
            rows.append((f"data.byte_order.{order}.set", d.byte_orders.command(order)[0],
                         f"selects {order}-endian binary values"))
    rows += _measurement_rows(d)
    rows += [(f"data.traces.{n}", d.trace_query.render(**trace_tokens(d, n)),
              f"reads {n} ({d.layout} pairs per point)") for n in d.traces]
    rows += [(f"data.switch_terms.{n.split('.', 1)[1]}", d.trace_query.render(
        **trace_tokens(d, n)), f"reads the switch term {SWITCH_WORDS[n]} for an unknown-thru "
        "calibration") for n in d.switch_terms]
    axis = d.frequency
    if axis is not None:
        rows += [(f"data.frequency.{k}", t, f"reads the frequency axis ({axis.kind}, "
                  f"{axis.scale:g} Hz per unit)") for k, t in (
                      ("query", axis.query), ("start", axis.start), ("stop", axis.stop),
                      ("points", axis.points))]
    rows += [("trigger.command", d.trigger, f"starts one sweep; then waits by {d.wait}"),
             ("trigger.wai", d.wai, "holds later commands until the sweep is done"),
             ("trigger.poll.arm", d.poll.arm if d.poll else None, "sent once after the trigger"),
             ("trigger.poll.query", d.poll.query if d.poll else None,
              "asked until the sweep is done"),
             ("quirks.read_request", d.quirks.read_request, "sent after each query"),
             ("trigger.sweep_time_query", d.sweep_time_query, "sizes the sweep's deadline"),
             ("errors.query", d.error_query,
              f"reads one error-queue entry ({d.error_none_code} = empty)")]
    if d.switch is not None:
        rows.append(("switch.set", d.switch.set, "connects a calibration standard: "
                     + ", ".join(f"{k}={v}" for k, v in d.switch.tokens.items())))
        rows.append(("switch.query", d.switch.query, f"reads the switch ({d.switch.reply})"))
    out = []
    for key, template, purpose in rows:
        if template is None:
            continue
        text = template if isinstance(template, str) else template.text
        out.append({"key": key, "command": text, "purpose": purpose})
    return out


def _measurement_rows(d: Any) -> list[tuple[str, Any, str]]:
    from drivers.trace_reader import trace_tokens

    spec = d.measurement
    if spec is None:
        return []
    rows = []
    for name in (*d.traces, *d.switch_terms):
        tokens = trace_tokens(d, name)
        when = "before it is first read" if name in d.switch_terms else "at each configure"
        rows += [(f"measurement.{part}[{name}]", t.render(**tokens), purpose)
                 for part, group, purpose in (
                     ("define", spec.define, f"defines the measurement {when}"),
                     ("select", spec.select, "selects it before its trace is read"),
                     ("cleanup", spec.cleanup, "removes it on close"))
                 for t in group]
    return rows


def render(report: dict[str, Any]) -> str:
    lines = [f"dialect {report['dialect']} ({report['file']}): valid",
             f"  terminators, data layout and {len(report['commands'])} commands:"]
    width = max(len(c["key"]) for c in report["commands"])
    lines += [f"  {c['key']:<{width}}  {c['command']!r:<34} {c['purpose']}"
              for c in report["commands"]]
    if "steps" not in report:
        lines.append("  (offline: give --resource to try each command on the instrument)")
        return "\n".join(lines)
    lines.append(f"on {report['resource']}:")
    for step in report["steps"]:
        mark = "FAIL" if not step["ok"] else "ok  " if step["sent"] is not None else "skip"
        sent = f"sent {step['sent']!r}" if step["sent"] is not None else "not sent"
        got = f" -> {step['reply']!r}" if step["reply"] is not None else ""
        errors = "".join(f" | error {c} \"{t}\"" for c, t in step["errors"])
        note = f"  ({step['note']})" if step["note"] else ""
        lines.append(f"  {mark} {step['key']}: {sent}{got}{errors}{note}")
    failed = report["failed"]
    lines.append(f"{failed} command(s) failed: see the keys marked FAIL" if failed else
                 "every command worked; the instrument is as it was found")
    return "\n".join(lines)
