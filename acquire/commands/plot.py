"""``sweepd plot FILE.sNp [--mask MASK] [-o out.png|out.svg]``: one page per sweep.

Match (SWR, return loss or S11 dB) with masks drawn and failing points marked, R and X
against frequency, and a Smith chart with the resonance and band edges labelled.
Exit code 0 when written (and every mask passes), 1 when a mask fails, 2 on error.
"""

from __future__ import annotations

import argparse

_SCALES = {"swr": "swr", "return-loss": "return_loss", "db": "s_db"}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", help="Touchstone file (.s1p, .s2p, ..., .ts)")
    parser.add_argument(
        "--mask", action="append", default=[], metavar="MASK",
        help="mask name or path to draw and judge; repeat for several",
    )
    parser.add_argument(
        "-o", "--output", metavar="OUT",
        help="picture to write, .png or .svg (default: FILE with .png beside it)",
    )
    parser.add_argument(
        "--scale", choices=sorted(_SCALES),
        help="match axis: swr, return-loss (positive dB) or db (S11 in dB); "
             "default: the first mask's quantity, else swr",
    )
    parser.add_argument("--title", help="page title (default: the file name)")
    parser.epilog = "Exit codes: 0 written (masks pass), 1 a mask fails, 2 error."


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from acquire.check_parse import mask_check
    from acquire.commands.check import read_sweep
    from acquire.masks import evaluate_mask
    from acquire.plots import FORMATS, PlotError, plot_file

    source = Path(args.file)
    out = Path(args.output) if args.output else source.with_suffix(".png")
    if out.suffix.lower() not in FORMATS:
        raise PlotError(f"plot output {out}: the name must end in .png or .svg")
    masks = [mask_check(ref, Path.cwd()).mask for ref in args.mask]
    sweep = read_sweep(args.file)
    written = plot_file(sweep, out, masks=masks, scale=_SCALES.get(args.scale),
                        title=args.title or source.name)
    print(written)
    failed = any(evaluate_mask(mask, sweep).verdict == "fail" for mask in masks)
    return 1 if failed else 0
