"""Distance to fault: a reflection sweep in the time domain, along the cable.

- ``windows``: the tapers and their measured sidelobe level and main-lobe width;
- ``transform``: band-pass and low-pass (impulse and step) inverse transforms;
- ``distance``: velocity factor, distance axis, resolution and range, loss compensation;
- ``cable``: cable files (velocity factor, loss per metre);
- ``peaks``: the reflections, sidelobes told apart;
- ``spec``: settings as plans, distance masks and the command line give them;
- ``checks``: distance zones with limits, as plan checks and distance masks;
- ``plot``: return loss against distance with the faults marked.

``sweepd dtf`` (acquire/commands/dtf.py) puts them together. matplotlib is imported
only inside the functions of ``plot``.
"""
