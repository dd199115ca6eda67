"""The plot page under its first import path; the code lives in ``acquire.plotting``."""

from acquire.plotting import FORMATS, SCALES, PlotError, plot_file, render

__all__ = ["FORMATS", "SCALES", "PlotError", "plot_file", "render"]
