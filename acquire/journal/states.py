"""The states a run and a measurement row can be in: one meaning each.

Runs (one per ``sweepd run`` / ``measure`` call, station shift or soak job):

- ``running``: the process that owns it is (or was, until it was killed) at work;
- ``finished``: ended normally;
- ``stopped``: ended early on request (Ctrl-C, a signal, a cancel);
- ``failed``: ended by an error that was journalled as a fault;
- ``crashed``: found ``running`` by a later start after its process had died, and
  settled then (its ``pending`` rows reconciled).

Measurements (one per sweep index of a run; an index appears at most once):

- ``pending``: taken and judged, journalled with the file names it will get, files not
  yet known to be written (only ever seen while a process is writing, or after a kill);
- ``stored``: its Touchstone file (and summary) are complete on disk;
- ``measured``: taken and judged, metrics journalled, data deliberately not kept as a
  file (a soak keeps every Nth sweep); no Touchstone path;
- ``missed``: due but never taken (schedule slot passed, instrument fault, disk held,
  stop): no data was acquired. Only ever written as a new row: an index already in the
  journal keeps its state;
- ``interrupted``: was ``pending`` when its process died (or was interrupted while
  writing) and its Touchstone file never landed; files written ahead of it are removed;
- ``failed``: taken, but its files could not be written (disk full, permissions).

A soak held for disk space takes no sweeps until space returns; it journals one *hold*
(the span of indices it did not take, with the reason), not one ``missed`` row per
sweep. Counters count the sweeps of a hold as missed.
"""

from __future__ import annotations

RUN_STATES = ("running", "finished", "stopped", "failed", "crashed")
MEASUREMENT_STATES = ("pending", "stored", "measured", "missed", "interrupted", "failed")
DONE_STATES = ("stored", "measured")  # a sweep whose data were taken and journalled
FINAL_STATES = ("stored", "measured", "missed", "interrupted", "failed")
INTERRUPTED_NOTE = "interrupted before its file was written"
