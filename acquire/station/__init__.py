"""The production-line station: serial in, sweep, verdict, file, yield, all shift long.

Modules (small on purpose):

- ``config``: the plan's ``station:`` section (serial rule, band, golden unit), validated
  with one-line errors naming the plan file and key path.
- ``serials``: checking a scanned serial (pattern, length, path tricks, control bytes).
- ``figures``: the key figures shown for every unit (resonance, usable bandwidth, worst
  SWR in band, worst margin).
- ``unit``: one unit (or the golden unit) measured, judged, filed and journalled;
  ``measure``: the same for one ``sweepd measure`` call, with its JSON result.
- ``golden`` and ``schedule``: comparing the golden unit with its reference, and when the
  line is stopped or a golden check is due (from the journal).
- ``counters``, ``stats``, ``records``, ``report``, ``export``, ``summary``: yield,
  statistics with Ppk and Cpk, per-measurement values, the summary text, the CSV export, and
  reading an output folder for ``sweepd summary``.
- ``terminal``, ``display``, ``interrupts``, ``loop``: the operator's terminal loop.
- ``errors``: the error classes. (The demo's shift and its stand-in operator live in
  ``acquire.demo``; the pseudo-terminal driver for tests in ``tests/station_driver.py``.)

Importing this package is light; the modules import numpy where they need it.
"""
