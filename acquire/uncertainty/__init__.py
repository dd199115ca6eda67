"""Measurement uncertainty of corrected sweeps, and decision rules that respect it.

- ``budget``: the inputs (kit tolerances, load quality, connector repeatability, trace
  noise from the calibration's load reading scaled by IF bandwidth and power, drift since
  the calibration) and their distributions;
- ``propagate``: first-order propagation to each point of a corrected reflection
  (EURAMET cg-12 residual terms, GUM law of propagation), |Γ| with U (k = 2), return loss
  and SWR as intervals;
- ``transmission``: |S21| after a one-path-two-port (enhanced-response) calibration;
- ``fulltwoport``: S11, S21, S12 and S22 after a full two-port calibration (the whole
  calibration solved again with every input moved; ``fullcalset`` checks that a cal set
  holds what that model needs);
- ``montecarlo``: the full error model drawn trial by trial (used by the tests);
- ``decision``: simple and guarded acceptance (ILAC-G8:09/2019, ISO 14253-1:2017);
- ``capture``: the uncertainty of one capture (JSON block, Touchstone comment lines);
- ``plot``: the band drawn around a plotted trace.

See shared notes in DEVELOPERS.md ("Uncertainty") and README ("Uncertainty and decision
rules").
"""
