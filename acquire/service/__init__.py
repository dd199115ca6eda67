"""The measurement service: an HTTP API and a live status page served by ``sweepd serve``.

``acquire.instruments`` (shared with the soak daemon) serialises access per instrument
and keeps sessions open between calls; ``plans`` resolves plan names inside the served
folder; ``app`` builds the web application (OpenAPI at ``/openapi.json``); ``measure``
runs one unit; ``overview`` and ``page`` make the status page; ``runner`` starts it all
beside the soak daemon; ``access`` decides who may call it.
"""
