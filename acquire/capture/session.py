"""``Session``: one analyzer opened and configured for one plan, and each sweep of it
turned into a ``Sweep`` record with full metadata.

Callers ask the session, never its analyzer or transport: ``measure`` (one raw sweep),
``measure_with`` (one raw sweep plus extra readings of the same sweep, such as the
analyzer's switch terms; ``reads_switch_terms`` says whether the dialect has them),
``identity_text``, ``applied`` (the stimulus the instrument accepted), ``is_open``,
``reconnect``, ``settings_lost`` and ``reconfigure`` (after a fault or a restart),
``check_errors``, and ``switch_name`` / ``select_standard`` (the analyzer's standard switch).
"""

from __future__ import annotations

import logging
import time
from collections.abc import Sequence
from dataclasses import asdict
from typing import Any

import numpy as np

from acquire.holders import busy_message
from acquire.plan import Plan
from acquire.sweep import Sweep
from acquire.utc import utc_now, utc_text
from drivers.analyzer import Analyzer
from drivers.dialect import load_dialect
from drivers.errors import ConnectError
from drivers.stimulus import Stimulus

log = logging.getLogger(__name__)


def stimulus_meta(stimulus: Any) -> dict[str, float | int]:
    return {key: (int(v) if key in ("points", "averaging") else float(v))
            for key, v in asdict(stimulus).items()}


class Session:
    """One analyzer opened and configured for one plan (``resource`` overrides the plan's)."""

    def __init__(self, plan: Plan, resource: str | None = None) -> None:
        spec = plan.instrument
        self.plan = plan
        self.resource: str = resource or spec.resource
        self.dialect = load_dialect(spec.dialect)
        self._analyzer = Analyzer(
            self.resource,
            self.dialect,
            timeout_s=spec.timeout_s,
            connect_timeout_s=spec.connect_timeout_s,
            data_format=spec.data_format,
            byte_order=spec.byte_order,
            serial={"baud_rate": spec.baud_rate} if spec.baud_rate else None,
            max_sweep_time_s=spec.max_sweep_time_s,
        )
        self._identity_text = ""
        self._applied: Stimulus = plan.stimulus

    # -- life cycle ------------------------------------------------------------------------
    def open(self) -> Session:
        try:
            self._analyzer.open()
        except ConnectError as exc:  # a busy instrument: say who holds it, in words
            words = busy_message(str(exc), self.resource)
            if words is None:
                raise
            raise ConnectError(words) from None
        ident = self._analyzer.identity
        self._identity_text = ",".join((ident.maker, ident.model, ident.serial, ident.firmware))
        self._applied = self._analyzer.configure(self.plan.stimulus)
        log.info("connected to %s (%s), configured", self.resource, self._identity_text)
        return self

    def close(self) -> None:
        self._analyzer.close()

    def __enter__(self) -> Session:
        return self.open()

    def __exit__(self, *exc: object) -> None:
        self.close()

    # -- what callers read -----------------------------------------------------------------
    @property
    def identity_text(self) -> str:
        """``maker,model,serial,firmware`` as the instrument reported it."""
        return self._identity_text

    @property
    def applied(self) -> Stimulus:
        """The stimulus the instrument accepted (read back after configuring)."""
        return self._applied

    @property
    def is_open(self) -> bool:
        """Whether the link to the instrument is open (it may still be broken)."""
        return self._analyzer.transport.is_open

    @property
    def reads_switch_terms(self) -> bool:
        """Whether the dialect declares ``data.switch_terms`` (see ``measure_with``)."""
        return self._analyzer.reads_switch_terms

    @property
    def switch_name(self) -> str | None:
        """The dialect's name when the analyzer has a standard switch, else None."""
        return self.dialect.name if self.dialect.switch is not None else None

    # -- after faults ----------------------------------------------------------------------
    def reconnect(self) -> None:
        self._analyzer.reconnect()

    def settings_lost(self) -> bool:
        """True when the instrument no longer holds the plan's settings (a restart)."""
        return not self._analyzer.settings_match(self.plan.stimulus)

    def reconfigure(self) -> bool:
        """Configure the plan's stimulus again; True when the accepted stimulus is the
        same as before (so a cal set chosen for it still fits)."""
        before = self._applied
        self._applied = self._analyzer.configure(self.plan.stimulus)
        return self._applied == before

    def check_errors(self, context: str) -> None:
        """Raise ``ScpiErrorQueue`` when the instrument's error queue holds entries."""
        self._analyzer.check_errors(context)

    def select_standard(self, standard: str) -> None:
        """Connect a cal standard through the analyzer's switch (``switch_name``)."""
        self._analyzer.select_standard(standard)

    # -- measuring -------------------------------------------------------------------------
    def measure(self, serial: str = "", **meta: Any) -> Sweep:
        """One raw sweep of the plan's S-parameters as a ``Sweep`` with metadata."""
        started = utc_now()
        t0 = time.perf_counter()
        freq, data = self._analyzer.sweep(self.plan.measure)
        return self._record(freq, data, started, time.perf_counter() - t0, serial, meta)

    def measure_with(self, extra: Sequence[str], serial: str = "", **meta: Any
                     ) -> tuple[Sweep, dict[str, np.ndarray]]:
        """One raw sweep as ``measure`` gives it, plus the ``extra`` readings of the same
        sweep (``switch.forward``, ``switch.reverse``: the analyzer's switch terms, when
        the dialect declares ``data.switch_terms``), each an (n,) complex array."""
        started = utc_now()
        t0 = time.perf_counter()
        count = len(self.plan.measure)
        freq, data = self._analyzer.sweep([*self.plan.measure, *extra])
        sweep = self._record(freq, data[:, :count], started, time.perf_counter() - t0,
                             serial, meta)
        return sweep, {name: data[:, count + i].copy() for i, name in enumerate(extra)}

    def _record(self, freq: np.ndarray, data: np.ndarray, started: Any, duration: float,
                serial: str, meta: dict[str, Any]) -> Sweep:
        return Sweep(
            freq,
            assemble_matrix(data, self.plan.ports),
            (50.0,) * self.plan.ports,
            {
                "plan": self.plan.name,
                "serial": serial,
                "instrument": self._identity_text,
                "resource": self.resource,
                "dialect": self.dialect.name,
                "stimulus": stimulus_meta(self._applied),
                "started_utc": utc_text(started),
                "sweep_s": round(duration, 6),
                **meta,
            },
        )


def assemble_matrix(data: np.ndarray, ports: int) -> np.ndarray:
    """(n, k) columns in ``S11`` or ``S11 S21 S12 S22`` order → (n, p, p)."""
    if ports == 1:
        return data.reshape(-1, 1, 1)
    s = np.empty((data.shape[0], 2, 2), dtype=np.complex128)
    s[:, 0, 0], s[:, 1, 0], s[:, 0, 1], s[:, 1, 1] = data.T
    return s
