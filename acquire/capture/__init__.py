"""The measurement path: one sweep of a plan from the analyzer to judged, stored files.

Every mode (``sweepd run``, the station, ``sweepd measure``, the soak, the service) walks
it downwards, in this order:

- ``session``: ``Session``, one analyzer opened and configured for a plan; its methods are
  all callers need (sweep, identity, applied stimulus, link state, reconnect, settings
  check, error queue, standard switch);
- ``calchoice``: which cal set applies (``choose_calibration``, ``cal_dir_for``);
- ``judge``: one sweep corrected and judged into a ``Capture`` (nothing written);
- ``files``: file names from the plan's template and ``store`` (summary, raw copy,
  Touchstone, each atomic, in that order);
- ``records``: what the journal keeps of a capture, and ``journalled_run`` (start, fault on
  error, end) shared by the commands;
- ``run``: the whole of ``sweepd run``.

Importing this package is light; its modules import numpy and the drivers themselves.
"""
