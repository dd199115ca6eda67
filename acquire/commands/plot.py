"""``sweepd plot FILE.sNp [FILE ...] [--mask MASK] [-o out.png|out.svg]``.

One file: one page with the match (SWR, return loss or S11 dB) and the masks drawn,
failing points marked, the other masked quantities, R and X against frequency where
they mean something, and a Smith chart with markers. Several files (or ``--quantity``,
``--param``, ``--difference``): an overlay of every file in one quantity with the masks,
optionally the difference from the first file.
Exit code 0 when written (and every mask passes), 1 when a mask fails, 2 on error.
"""

from __future__ import annotations

import argparse

from acquire.commands.check import add_marker_argument, read_sweep

_SCALES = {"swr": "swr", "return-loss": "return_loss", "db": "s_db"}
_QUANTITIES = {**_SCALES, "phase": "phase", "group-delay": "group_delay",
               "impedance": "impedance"}


def add_arguments(parser: argparse.ArgumentParser) -> None:

    parser.add_argument("file", nargs="+",
                        help="Touchstone file (.s1p, .s2p, ..., .ts); several for an overlay")
    parser.add_argument(
        "--mask", action="append", default=[], metavar="MASK",
        help="mask name or path to draw and judge; repeat for several",
    )
    parser.add_argument(
        "-o", "--output", metavar="OUT",
        help="picture to write, .png or .svg (default: the first FILE with .png, or "
             "-overlay.png for several files)",
    )
    parser.add_argument(
        "--scale", choices=sorted(_SCALES),
        help="match axis of a one-file page: swr, return-loss (positive dB) or db (S11 in "
             "dB); default: the first mask's quantity, else swr",
    )
    parser.add_argument("--title", help="page title (default: the file name)")
    add_marker_argument(parser)
    overlay = parser.add_argument_group("overlay (several files on one page)")
    overlay.add_argument("--param", metavar="SIJ",
                         help="parameter to overlay (default S11)")
    overlay.add_argument("--quantity", choices=sorted(_QUANTITIES),
                         help="quantity to overlay (default: the mask's, else swr for a "
                              "reflection, db for a transmission)")
    overlay.add_argument("--difference", action="store_true",
                         help="add a panel with each file minus the first")
    parser.epilog = "Exit codes: 0 written (masks pass), 1 a mask fails, 2 error."


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from acquire.check_parse import mask_check
    from acquire.masks import evaluate_mask
    from acquire.plotting import check_output
    from acquire.uncertainty.plot import attach_from_summary

    sources = [Path(name) for name in args.file]
    overlay = len(sources) > 1 or args.param or args.quantity or args.difference
    out = Path(args.output) if args.output else _default_output(sources[0], bool(overlay))
    check_output(out)
    masks = [mask_check(ref, Path.cwd()).mask for ref in args.mask]
    # the uncertainty band, when a capture JSON beside the file holds one
    sweeps = [attach_from_summary(read_sweep(str(path)), path) for path in sources]
    if overlay:
        _overlay(args, sources, sweeps, masks, out)
    else:
        _page(args, sources[0], sweeps[0], masks, out)
    failed = any(evaluate_mask(mask, sweep).verdict == "fail"
                 for mask in masks for sweep in sweeps)
    return 1 if failed else 0


def _default_output(first, overlay: bool):
    return first.with_name(first.stem + "-overlay.png") if overlay else first.with_suffix(".png")


def _page(args: argparse.Namespace, source, sweep, masks, out) -> None:
    from acquire.metrics.markers import sweep_markers
    from acquire.plotting import plot_file

    readouts = sweep_markers(sweep, args.marker)
    print(plot_file(sweep, out, masks=masks, scale=_SCALES.get(args.scale),
                    title=args.title or source.name, markers=readouts))
    for readout in readouts:
        print(f"  marker {readout.line()}")


def _overlay(args: argparse.Namespace, sources, sweeps, masks, out) -> None:
    from acquire.plotting import PlotError, save_figure
    from acquire.plotting.overlay import Source, render_overlay

    if args.marker:
        raise PlotError("plot: markers are drawn on a one-file page; give one file, or use "
                        "sweepd check FILE --marker SPEC for each file")
    param = (args.param or "S11").upper()
    fig = render_overlay([Source(p.name, s) for p, s in zip(sources, sweeps, strict=True)],
                         param=param, quantity=_QUANTITIES.get(args.quantity), masks=masks,
                         difference=args.difference, title=args.title)
    print(save_figure(fig, out))
