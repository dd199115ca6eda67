"""``sweepd calibrate PLAN``: the guided calibration (prompt, measure, check, save)."""

from __future__ import annotations

import argparse

PROMPT_CHOICES = ("terminal", "command", "switch", "scripted")

EPILOG = """\
keys at a prompt (type the letter, then Enter):
  Enter measure (last prompt: save)   b back   r redo last   1-9 go to step
  s skip verification   i ignore the last cal   a abort   ? help

backends (plan: calibration.prompt and calibration.switch.command):
  terminal  connect each standard by hand, answer line prompts (ssh and pipes work)
  command   an external command connects each standard, e.g.
            switch: {command: "fixturectl connect {standard}"}  (no shell)
  switch    the analyzer's own standard switch, through its dialect
  scripted  --script lists what the 'technician' connects and presses, e.g.
            --script "short,short,open,short,load"; then unattended

cal sets go to the plan's cal store: calibration.dir, else cal/ in the plan's output.dir
(both taken from the plan's folder); run, measure, station and soak read the same store
whatever their --output.

Exit codes: 0 cal set saved, 1 verification failed (nothing saved), 2 error or abort
(nothing saved; measured steps are kept for --resume)."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.formatter_class = argparse.RawDescriptionHelpFormatter
    parser.epilog = EPILOG
    parser.add_argument("plan", help="test plan (YAML) with a calibration section")
    parser.add_argument("--resource", help="VISA resource string; overrides the plan's")
    parser.add_argument("--prompt", choices=PROMPT_CHOICES,
                        help="who connects standards and answers (default: the plan's)")
    parser.add_argument("--switch-command", metavar="CMD",
                        help="per-step command with {standard}; overrides the plan's")
    parser.add_argument("--script", metavar="ITEMS",
                        help="scripted technician: standards and keys, comma separated")
    parser.add_argument("--confirm", action="store_true",
                        help="command/switch: ask on the terminal before each step")
    parser.add_argument("--retries", type=int, default=2, metavar="N",
                        help="unattended: repeats of a failing step before giving up "
                             "(default 2)")
    parser.add_argument("--verify", metavar="load|FILE",
                        help="verify at the end: the load again, or a verification device "
                             "against its reference Touchstone file")
    parser.add_argument("--verify-tolerance", type=float, metavar="X",
                        help="allowed reflection difference (linear) for --verify "
                             "(default: derived)")
    parser.add_argument("--resume", action="store_true",
                        help="continue an unfinished calibration of this plan")
    parser.add_argument("--no-compare", action="store_true",
                        help="do not compare readings with the last cal set")
    parser.add_argument("--ascii", action="store_true", help="plain ASCII progress marks")


def run(args: argparse.Namespace) -> int:
    from acquire.guided import Options, calibrate
    from acquire.plan import load_plan

    plan = load_plan(args.plan)
    options = Options(
        resource=args.resource,
        prompt=args.prompt,
        switch_command=args.switch_command,
        script=args.script,
        confirm=args.confirm,
        retries=args.retries,
        verify=args.verify,
        verify_tolerance=args.verify_tolerance,
        resume=args.resume,
        compare_last=not args.no_compare,
        ascii_only=True if args.ascii else None,
    )
    return calibrate(plan, options).exit_code
