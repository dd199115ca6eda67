"""The analyzer adapter: one instrument, driven through its dialect.

    with Analyzer("TCPIP::127.0.0.1::5025::SOCKET", load_dialect("scpi-generic")) as an:
        an.identity                          # Identity(maker, model, serial, firmware)
        applied = an.configure(stimulus)     # set, read back, check the error queue
        freq_hz, data = an.sweep(["S11"])    # (n,) float64, (n, 1) complex128

Opening follows the usual driver habits for IEEE 488.2 instruments: clear input, clear
status (``*CLS``), read the identity, send the dialect's opening commands, choose the data
format and byte order and read them back, drain the error queue. The work is done by
parts with one job each: ``Conversation`` (commands and replies), ``FormatChoice`` (data
format negotiation), ``SettingsIO`` (stimulus), ``TraceReader`` (sweeps and traces),
``ErrorQueue`` and ``select_standard`` (the switch); this class holds them together under
one lock.
"""

from __future__ import annotations

import logging
import re
import threading
import time
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from drivers.blocks import quote
from drivers.conversation import Conversation
from drivers.deadline import Deadline
from drivers.dialect_model import Dialect
from drivers.error_queue import ErrorQueue
from drivers.errors import ConnectError, ConnectionLost, InstrumentError, ReplyError
from drivers.format_choice import FormatChoice, check_format, check_order
from drivers.replies import Identity, parse_identity
from drivers.settings_io import SettingsIO
from drivers.stimulus import Stimulus
from drivers.switch import select_standard
from drivers.trace_reader import TraceReader
from drivers.transport import SerialSettings, Transport

__all__ = ["Analyzer", "Identity"]

log = logging.getLogger(__name__)

REFUSAL_RETRY_S = 0.05  # pause before trying again when the instrument is still busy
MAX_SWEEP_TIME_S = 120.0  # default bound on the sweep time an instrument may claim


class Analyzer:
    """A vector network analyzer behind a VISA resource; constructing does no I/O."""

    def __init__(
        self,
        resource: str,
        dialect: Dialect,
        *,
        timeout_s: float = 5.0,
        connect_timeout_s: float = 5.0,
        data_format: str | None = None,
        byte_order: str | None = None,
        serial: SerialSettings | Mapping[str, Any] | None = None,
        max_sweep_time_s: float = MAX_SWEEP_TIME_S,
    ) -> None:
        self.dialect = dialect
        self.max_sweep_time_s = float(max_sweep_time_s)
        self.transport = Transport(
            resource,
            write_termination=dialect.write_termination,
            read_termination=dialect.read_termination,
            timeout_s=timeout_s,
            connect_timeout_s=connect_timeout_s,
            serial=serial,
        )
        self.resource = resource
        self._talk = Conversation(self.transport, dialect, resource)
        self._errors = ErrorQueue(self._talk)
        self._formats = FormatChoice(
            self._talk,
            self._errors,
            check_format(dialect, data_format),
            check_order(dialect, byte_order),
        )
        self._settings = SettingsIO(self._talk, self._errors)
        self._traces = TraceReader(self._talk, self._formats, self._current_stimulus)
        self._lock = threading.RLock()
        self._identity: Identity | None = None
        self._applied: Stimulus | None = None
        self._defined = False  # measurements defined in this session (cleanup on close)

    # -- lifetime ------------------------------------------------------------------
    def open(self) -> Analyzer:
        """Connect, clear, identify, run the opening sequence, choose the data format."""
        with self._lock:
            if self.transport.is_open:
                return self
            deadline = Deadline(self.transport.connect_timeout_s)
            while True:
                self.transport.open()
                try:
                    self._start_session()
                    return self
                except (_Refused, ConnectError, ConnectionLost) as refusal:
                    # A busy instrument says so (an error entry) and hangs up: try again
                    # until the connect timeout, it may be finishing with another client.
                    self.transport.close()
                    if deadline.expired():
                        if isinstance(refusal, _Refused):
                            raise ConnectError(
                                f"instrument {self.resource}: refused the connection: {refusal}"
                            ) from None
                        raise
                    time.sleep(REFUSAL_RETRY_S)
                except BaseException:
                    self.transport.close()
                    raise

    def close(self) -> None:
        """Send the dialect's measurement cleanup (when it defined any), then disconnect."""
        with self._lock:
            if self._defined and self.transport.is_open:
                try:
                    self._traces.cleanup_measurements()
                    left = self._errors.drain()  # also: the cleanup was taken before we go
                    if left:
                        log.debug("%s: after the cleanup: %s", self.resource, left)
                except InstrumentError as exc:  # closing anyway; the link may be gone
                    log.debug("%s: measurement cleanup failed: %s", self.resource, exc)
            self._defined = False
            self._traces.defined_extra = []  # a reopened instrument may have forgotten them
            self.transport.close()
            self._traces.sweep_pending = False

    def reconnect(self) -> None:
        """Close and open again (after a dropped link or a timeout)."""
        with self._lock:
            self.close()
            self.open()

    def __enter__(self) -> Analyzer:
        return self.open()

    def __exit__(self, *exc: object) -> None:
        self.close()

    @property
    def identity(self) -> Identity:
        if self._identity is None:
            raise ReplyError(f"instrument {self.resource}: identity unknown (not opened yet)")
        return self._identity

    @property
    def data_format(self) -> str:
        """The encoding in use (``ascii``, ``real32``, ``real64``) once open."""
        fmt = self._formats.format
        return fmt.encoding if fmt else (self._formats.want_format or "")

    @property
    def byte_order(self) -> str:
        return self._formats.order

    @property
    def applied(self) -> Stimulus | None:
        """The settings read back by the last ``configure`` (or ``read_settings``)."""
        return self._applied

    def _start_session(self) -> None:
        d, t = self.dialect, self.transport
        unasked = t.clear_input()
        try:
            if d.clear is not None:
                t.write(d.clear.render())
            reply = self._talk.query(d.identity.render())
        except ConnectionLost:
            if unasked:  # it said something unasked and hung up: a refusal
                raise _Refused(quote(unasked, 80)) from None
            raise
        if _REFUSAL.match(reply):  # e.g. '-300,"Device busy"': it serves another client
            raise _Refused(quote(reply.encode("ascii", "replace"), 80))
        shape = d.identity_reply
        self._identity = parse_identity(
            reply, self._talk.where(d.identity.text), shape.separator, shape.fields
        )
        for command in d.opening:
            self._talk.write(command.render())
        self._formats.choose()
        self._errors.check("after opening")

    # -- settings --------------------------------------------------------------------
    def configure(self, stimulus: Stimulus) -> Stimulus:
        """Send the stimulus, read every setting back and check the error queue.

        Returns the settings as read back. A read-back outside the dialect's tolerance is
        ``SettingMismatch`` naming the setting, the value sent and the value read;
        entries in the error queue are ``ScpiErrorQueue``.
        """
        with self._lock:
            self._defined = self.dialect.measurement is not None
            self._traces.define_measurements()
            self._applied = self._settings.configure(stimulus)
            self._traces.sweep_time_s = self._bounded_sweep_time()
            return self._applied

    def _bounded_sweep_time(self) -> float:
        """The instrument's sweep time, refused when above ``max_sweep_time_s``."""
        seconds = self._settings.sweep_time()
        if seconds > self.max_sweep_time_s:
            query = self.dialect.sweep_time_query
            shown = query.text if query else "sweep time"
            raise ReplyError(
                f"instrument {self.resource}: '{shown}' claims a sweep takes {seconds:.6g} s, "
                f"more than instrument.max_sweep_time ({self.max_sweep_time_s:g} s): refused "
                "(raise max_sweep_time in the plan if the sweep really is that slow)"
            )
        return seconds

    def settings_match(self, stimulus: Stimulus) -> bool:
        """True when the instrument still holds ``stimulus`` (e.g. it did not reboot)."""
        with self._lock:
            return self._settings.matches(stimulus)

    def read_settings(self) -> Stimulus:
        """The instrument's current stimulus, read back without setting anything."""
        with self._lock:
            self._applied = self._settings.read()
            return self._applied

    def _current_stimulus(self) -> Stimulus:
        if self._applied is None:
            self._applied = self._settings.read()
        return self._applied

    # -- sweeps ----------------------------------------------------------------------
    @property
    def reads_switch_terms(self) -> bool:
        """Whether the dialect declares ``data.switch_terms`` (``sweep`` can read them)."""
        return bool(self.dialect.switch_terms)

    def sweep(self, params: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
        """Trigger one sweep, wait for it and read ``params``.

        ``params`` are S-parameters of the dialect's ``data.traces`` and, when it declares
        ``data.switch_terms``, the switch terms ``switch.forward`` (a2/b2, port 1 driving)
        and ``switch.reverse`` (a1/b1, port 2 driving), read as traces of the same sweep.
        Returns ``(freq_hz, data)``: (n,) float64 and (n, len(params)) complex128, one
        column per parameter in the order asked (column-major: each trace is received in
        place). With ``wait: wai`` the trigger, ``*WAI`` and the first trace query travel in
        one message: one round trip for a 1-port sweep. The error queue is not read here;
        call ``error_queue`` or ``check_errors`` at the cadence you need.
        """
        with self._lock:
            return self._traces.sweep(params)

    def trigger(self) -> None:
        """Start one sweep; with ``wait: opc`` also wait until it is complete."""
        with self._lock:
            self._traces.trigger()

    def read_traces(self, params: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
        """Read ``params`` from the last sweep (after ``trigger``); same shapes as ``sweep``."""
        with self._lock:
            return self._traces.read_traces(params)

    # -- errors and the standard switch -------------------------------------------------
    def error_queue(self) -> list[tuple[int, str]]:
        """Drain the error queue, oldest first (at most the dialect's ``max_entries`` reads)."""
        with self._lock:
            return self._errors.drain()

    def check_errors(self, context: str) -> None:
        """Drain the error queue; entries raise ``ScpiErrorQueue`` naming ``context``."""
        with self._lock:
            self._errors.check(context)

    def select_standard(self, name: str) -> None:
        """Switch the automatic standard switch to open, short, load, thru or device."""
        with self._lock:
            select_standard(self._talk, self._errors, name)


class _Refused(Exception):
    """The instrument answered the identity query with an error entry: it is busy."""


_REFUSAL = re.compile(r'^\s*-\d+\s*,\s*"')
