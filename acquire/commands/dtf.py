"""``sweepd dtf FILE.s1p --velocity 0.66 [--json] [-o plot.png]``: distance to fault.

Transforms the reflection of a Touchstone file to the distance axis, lists the
reflections (distance, level, return loss) and judges them against distance masks or a
plan's ``distance`` checks. Settings come from the plan or mask first; options given on
the command line win. Exit codes: 0 written and every limit met (or no limits), 1 a
limit is broken, 2 error. The JSON layout is documented in README.md ("Distance to
fault").
"""

from __future__ import annotations

import argparse

DTF_FORMAT = "sweepd-dtf"
DTF_VERSION = 1
_OPTIONS = {"velocity_factor": "--velocity", "cable": "--cable", "loss_per_m": "--loss-per-m",
            "window": "--window", "padding": "--padding", "floor": "--floor"}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", help="Touchstone file (.s1p, .s2p, ...)")
    parser.add_argument("--velocity", type=float, metavar="VF",
                        help="velocity factor of the cable, 0 < VF <= 1 (e.g. 0.66)")
    parser.add_argument("--cable", metavar="CABLE",
                        help="cable file (name or path): velocity factor and loss per metre")
    parser.add_argument("--loss-per-m", metavar="DB",
                        help="cable loss per metre at the band's centre, e.g. '0.12 dB'")
    parser.add_argument("--no-compensate", action="store_true",
                        help="show levels as measured, without adding back the cable loss")
    parser.add_argument("--mode", choices=("bandpass", "lowpass"),
                        help="bandpass (any grid, default) or lowpass (harmonic grid; adds "
                             "the step and impedance profile)")
    parser.add_argument("--window", metavar="WINDOW",
                        help="none, hann or kaiser-<beta> (default kaiser-6)")
    parser.add_argument("--padding", type=int, metavar="N", help="zero padding factor (8)")
    parser.add_argument("--floor", metavar="DB", help="list reflections above this level "
                        "(default '-50 dB')")
    parser.add_argument("--mask", action="append", default=[], metavar="MASK",
                        help="distance mask (domain: distance) to judge against; repeatable")
    parser.add_argument("--plan", metavar="PLAN", help="take settings (its dtf: section) and "
                        "limits (its distance checks) from this plan")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")
    parser.add_argument("--trace", action="store_true",
                        help="with --json: include the whole profile (distance, level)")
    parser.add_argument("-o", "--output", metavar="OUT", help="picture to write (.png, .svg)")
    parser.add_argument("--title", help="picture title (default: the file name)")
    parser.epilog = ("Exit codes: 0 pass (or no limits), 1 a limit is broken, 2 error, "
                     "130 interrupted.")


def run(args: argparse.Namespace) -> int:
    from acquire.commands.jsonout import run_with_json_errors

    return run_with_json_errors(args, "dtf", lambda: _run(args))


def _run(args: argparse.Namespace) -> int:
    from acquire.checks import evaluate_checks
    from acquire.commands.check import read_sweep
    from acquire.timedomain.peaks import find_peaks

    checks, base = _sources(args)
    override, given = _override(args)
    checks = [_with_spec(c, c.spec.merged(override, given)) for c in checks]
    spec = checks[0].spec if checks else base.merged(override, given)
    if args.output:
        _check_output(args.output)
    sweep = read_sweep(args.file)
    profile = spec.profile(sweep)
    peaks = find_peaks(profile, spec.floor_db)
    verdict = evaluate_checks(list(checks), sweep, metrics=False, source=str(args.file))
    if args.output:
        _plot(args, profile, peaks, checks, verdict)
    if args.json:
        print(_json(args, spec, profile, peaks, verdict))
    else:
        print("\n".join(_text(args.file, profile, peaks, verdict)))
    return verdict.exit_code


def _sources(args: argparse.Namespace):
    """Distance checks from --mask and --plan, and the plan's ``dtf:`` settings."""
    from pathlib import Path

    from acquire.check_parse import any_mask_check
    from acquire.errors import ConfigError
    from acquire.timedomain.checks import DistanceCheck
    from acquire.timedomain.spec import DtfSpec, parse_spec

    checks = [any_mask_check(ref, Path.cwd()) for ref in args.mask]
    for ref, check in zip(args.mask, checks, strict=True):
        if not isinstance(check, DistanceCheck):
            raise ConfigError(f"dtf: mask {ref} is a frequency mask; a distance mask has "
                              "'domain: distance' (use sweepd check for frequency masks)")
    base = DtfSpec()
    if args.plan:
        from acquire.plan import load_plan

        plan = load_plan(args.plan)
        found = [c for c in plan.checks if isinstance(c, DistanceCheck)]
        if "dtf" in plan.sections:
            base = parse_spec(plan.sections["dtf"])[0]
        elif not found:
            raise ConfigError(f"dtf: plan {args.plan} has neither a dtf section nor a "
                              "distance check")
        checks += found
    return checks, base


def _override(args: argparse.Namespace):
    """The settings given on the command line, validated like a plan's (errors name
    the option)."""
    from pathlib import Path

    from acquire.errors import ConfigError
    from acquire.timedomain.spec import parse_spec
    from acquire.yamlfile import Node

    raw = {
        "velocity_factor": args.velocity, "cable": args.cable, "loss_per_m": args.loss_per_m,
        "compensate_loss": False if args.no_compensate else None, "mode": args.mode,
        "window": args.window, "padding": args.padding, "floor": args.floor,
    }
    raw = {k: v for k, v in raw.items() if v is not None}
    try:
        return parse_spec(Node(raw, "sweepd dtf", error=ConfigError, base_dir=Path.cwd()))
    except ConfigError as exc:
        text = str(exc)
        for key, option in _OPTIONS.items():
            text = text.replace(f"sweepd dtf: {key}:", f"sweepd dtf: {option}:")
        raise ConfigError(text) from None


def _with_spec(check, spec):
    from dataclasses import replace

    return replace(check, spec=spec)


def _check_output(out: str) -> None:
    from pathlib import Path

    from acquire.timedomain.plot import FORMATS, DtfPlotError

    if Path(out).suffix.lower() not in FORMATS:
        raise DtfPlotError(f"plot output {out}: the name must end in .png or .svg")


def _plot(args, profile, peaks, checks, verdict) -> None:
    from pathlib import Path

    from acquire.timedomain.plot import write_plot

    failing = tuple(
        f["distance_m"]
        for r in verdict.results for z in r.details.get("zones", [])
        for f in z["failing_peaks"]
    )
    zones = checks[0].zones if checks else ()
    written = write_plot(profile, peaks, args.output, zones=zones, failing=failing,
                         title=args.title or Path(args.file).name)
    if not args.json:
        print(f"picture: {written}")


def _json(args, spec, profile, peaks, verdict) -> str:
    import json

    from acquire.jsonclean import json_safe

    body = {
        "format": DTF_FORMAT,
        "version": DTF_VERSION,
        "source": str(args.file),
        "settings": spec.to_dict(),
        "axis": profile.axis_dict(),
        "peaks": [p.to_dict() for p in peaks],
        "verdict": verdict.verdict,
        "exit_code": verdict.exit_code,
        "checks": [r.to_dict() for r in verdict.results],
    }
    if args.trace:
        z = profile.impedance_ohm
        body["trace"] = {
            "distance_m": profile.distance_m.tolist(),
            "level_db": profile.level_db.tolist(),
            "impedance_ohm": None if z is None else z.tolist(),
        }
    return json.dumps(json_safe(body), indent=2, allow_nan=False, ensure_ascii=True)


def _text(source: str, profile, peaks, verdict) -> list[str]:
    axis = profile.axis_dict()
    loss = axis["loss"]
    lines = [
        f"{source}: {axis['mode']}, window {axis['window']['name']} "
        f"(highest sidelobe {axis['window']['sidelobe_db']:.1f} dB), "
        f"velocity factor {axis['velocity_factor']:g}",
        f"  resolution {axis['resolution_m']:.4g} m (window: {axis['windowed_resolution_m']:.4g}"
        f" m), alias-free range {axis['alias_free_range_m']:.4g} m, bin {axis['bin_m']:.3g} m",
        "  loss " + (f"{loss['db_per_m']:g} dB/m ({loss['source']}), "
                     f"{'compensated' if loss['compensated'] else 'not compensated'}"
                     if loss["db_per_m"] is not None else "unknown, not compensated"),
        f"  {len(peaks)} reflection(s):" if peaks else "  no reflection above the floor",
    ]
    lines += [f"    {p.distance_m:10.3f} m  level {p.level_db:7.2f} dB  RL {p.return_loss_db:6.2f}"
              f" dB{_sign(p.sign)}" for p in peaks]
    if verdict.results:
        lines += verdict.report_lines()
    return lines


def _sign(sign: int | None) -> str:
    return {None: "", 1: "  (impedance up)", -1: "  (impedance down)", 0: ""}[sign]
