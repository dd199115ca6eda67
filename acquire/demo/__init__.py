"""The demo (``sweepd demo``): the main job end to end against a simulated analyzer.

All demo code lives here, and nothing outside the demo imports it but the ``demo``
command (and its tests):

- ``context``: the demo's working state (folder, simulator, plans, files produced), the
  control-channel call and the in-process ``sweepd`` call, ``demo_plan``;
- ``line``: writing the plans, the guided calibration, three units measured, one plot;
- ``operator``: a program standing in for the station operator over a pipe;
- ``station``: a short production shift driven through that operator;
- ``soak``: a short soak through the real daemon, with faults and drift;
- ``run``: the steps in order and ``run_demo``.

Importing this package is light; the modules import yaml and the simulator themselves.
"""
