"""A simulated two-port network analyzer: the independent "world" for sweepd's tests and demo.

It serves SCPI on a real TCP socket and a real pseudo-terminal, so clients reach it through
the same pyvisa-py transports a bench instrument uses. Nothing here imports ``acquire`` or
``drivers``: a bug in our calibration or driver code cannot hide behind the same bug here.

Entry points: ``simulators.server.SimServer`` (in-process, for tests), ``python -m
simulators`` (the ``sweepd sim`` command) and ``simulators.control`` (fixture control).
"""
