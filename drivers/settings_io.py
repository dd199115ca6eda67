"""Stimulus settings: sent in a safe order, read back, compared within the dialect's tolerance.

Values enter commands only as numbers formatted here (``format_number``) or as tokens from
the validated dialect.
"""

from __future__ import annotations

from collections.abc import Mapping

from drivers.conversation import Conversation
from drivers.dialect_model import SettingSpec
from drivers.error_queue import ErrorQueue
from drivers.errors import DialectError, ReplyError, SettingMismatch, StimulusError
from drivers.replies import parse_flag
from drivers.stimulus import Stimulus
from drivers.templates import format_number

UNITS = {
    "start": "Hz",
    "stop": "Hz",
    "points": "points",
    "power": "dBm",
    "if_bandwidth": "Hz",
    "averaging": "sweeps",
}
SETTING_ORDER = ("start", "stop", "points", "if_bandwidth", "power", "averaging")


class SettingsIO:
    """Sends and reads back the stimulus of one analyzer."""

    def __init__(self, talk: Conversation, errors: ErrorQueue) -> None:
        self.talk = talk
        self.errors = errors

    def configure(self, stimulus: Stimulus) -> Stimulus:
        """Send the stimulus, read every setting back and check the error queue.

        Returns the settings as read back. A read-back outside the dialect's tolerance is
        ``SettingMismatch`` naming the setting, the value sent and the value read;
        entries in the error queue are ``ScpiErrorQueue``.
        """
        wanted = self.wanted_values(stimulus)
        # Every command is built (and every value checked) before anything is sent.
        commands = {n: self._setting_commands(n, v) for n, v in wanted.items()}
        order = self._setting_order(stimulus)
        for name in order:
            for command in commands[name]:
                self.talk.send_setting(command)
        sent = {name: ";".join(commands[name]) for name in order}
        self.errors.check("after sending the settings " + ", ".join(order))
        applied = self.read_back()
        for name in order:
            spec = self.talk.dialect.settings[name]
            got = applied[name]
            if spec.fixed is not None and not spec.matches(wanted[name], got):
                raise SettingMismatch(
                    f"instrument {self.talk.resource}: setting {name}: the plan asks "
                    f"{wanted[name]:.12g} {UNITS[name]}, the instrument has a fixed "
                    f"{got:.12g} {UNITS[name]} ({self.talk.dialect.source}: "
                    f"settings.{name}.fixed)"
                )
            if not spec.matches(wanted[name], got):
                assert spec.query is not None
                raise SettingMismatch(
                    f"instrument {self.talk.resource}: setting {name}: sent "
                    f"{wanted[name]:.12g} {UNITS[name]} ('{sent[name]}'), read back "
                    f"{got:.12g} {UNITS[name]} ('{spec.query.text}')"
                )
        self._check_averaging_state(stimulus.averaging)
        self.errors.check("after reading the settings back")
        return self.stimulus_from(applied)

    def matches(self, stimulus: Stimulus) -> bool:
        """True when the instrument still holds ``stimulus`` (e.g. it did not reboot)."""
        wanted = self.wanted_values(stimulus)
        applied = self.read_back()
        settings = self.talk.dialect.settings
        return all(settings[n].matches(wanted[n], applied[n]) for n in applied)

    def read(self) -> Stimulus:
        """The instrument's current stimulus, read back without setting anything."""
        return self.stimulus_from(self.read_back())

    def wanted_values(self, stimulus: Stimulus) -> dict[str, float]:
        values = {
            "start": stimulus.start_hz,
            "stop": stimulus.stop_hz,
            "points": stimulus.points,
            "power": stimulus.power_dbm,
            "if_bandwidth": stimulus.if_bandwidth_hz,
            "averaging": stimulus.averaging,
        }
        dialect = self.talk.dialect
        if "averaging" not in dialect.settings:
            if stimulus.averaging != 1:
                raise DialectError(
                    f"{dialect.source}: settings has no averaging entry, so averaging "
                    f"{stimulus.averaging} cannot be set (only 1)"
                )
            del values["averaging"]
        return values

    def _setting_order(self, stimulus: Stimulus) -> list[str]:
        """Start before stop, unless the new start lies above the present stop."""
        settings = self.talk.dialect.settings
        names = [n for n in SETTING_ORDER if n in settings]
        current_stop = self.read_setting(settings["stop"])
        if stimulus.start_hz > current_stop:
            names[0], names[1] = "stop", "start"
        return names

    def _setting_commands(self, name: str, value: float) -> list[str]:
        """The commands that set ``name`` to ``value`` (SI units); none for a fixed one."""
        spec = self.talk.dialect.settings[name]
        if spec.fixed is not None:
            return []
        try:
            number = format_number(
                value if spec.integer else value / spec.scale, integer=spec.integer
            )
        except ValueError as exc:
            raise StimulusError(
                f"instrument {self.talk.resource}: setting {name}: {exc}"
            ) from None
        state = spec.state_on if value > 1 else spec.state_off
        return [t.render(value=number, state=state or "") for t in spec.set]

    def read_back(self) -> dict[str, float]:
        settings = self.talk.dialect.settings
        return {name: self.read_setting(spec) for name, spec in settings.items()}

    def read_setting(self, spec: SettingSpec) -> float:
        if spec.query is None:
            assert spec.fixed is not None
            return spec.fixed
        return self.talk.number(spec.query.render(), integer=spec.integer, scale=spec.read_scale)

    def _check_averaging_state(self, averaging: int) -> None:
        spec = self.talk.dialect.settings.get("averaging")
        if spec is None or spec.state_query is None:
            return
        command = spec.state_query.render()
        state = parse_flag(self.talk.query(command), self.talk.where(command))
        if state != (averaging > 1):
            raise SettingMismatch(
                f"instrument {self.talk.resource}: setting averaging: sent state "
                f"{'on' if averaging > 1 else 'off'}, '{command}' reads {'on' if state else 'off'}"
            )

    def stimulus_from(self, values: Mapping[str, float]) -> Stimulus:
        try:
            return Stimulus(
                start_hz=values["start"],
                stop_hz=values["stop"],
                points=int(values["points"]),
                power_dbm=values["power"],
                if_bandwidth_hz=values["if_bandwidth"],
                averaging=int(values.get("averaging", 1)),
            )
        except ValueError as exc:
            raise ReplyError(
                f"instrument {self.talk.resource}: settings read back are not a sweep: {exc}"
            ) from None

    def sweep_time(self) -> float:
        """The instrument's own sweep time in seconds (0 when the dialect cannot ask)."""
        dialect = self.talk.dialect
        query = dialect.sweep_time_query
        if query is None:
            return 0.0
        return max(0.0, self.talk.number(query.render(), scale=dialect.sweep_time_scale))
