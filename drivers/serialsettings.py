"""Line settings for serial (``ASRL``) resources, checked, and their pyvisa form."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, fields
from typing import Any

from drivers.errors import ConnectError

PARITIES = ("none", "odd", "even", "mark", "space")
FLOW_CONTROLS = ("none", "xon_xoff", "rts_cts", "dtr_dsr")


@dataclass(frozen=True)
class SerialSettings:
    """Line settings for ``ASRL`` resources (SCPI leaves these to the instrument)."""

    baud_rate: int = 115200
    data_bits: int = 8
    parity: str = "none"
    stop_bits: float = 1.0
    flow_control: str = "none"

    @classmethod
    def from_mapping(cls, values: Mapping[str, Any], resource: str = "") -> SerialSettings:
        known = {f.name for f in fields(cls)}
        where = f"instrument {resource}: " if resource else ""
        for key in values:
            if key not in known:
                raise ConnectError(
                    f"{where}serial.{key}: unknown setting; allowed: {', '.join(sorted(known))}"
                )
        settings = cls(**{k: v for k, v in values.items() if v is not None})
        settings.check(resource)
        return settings

    def check(self, resource: str = "") -> None:
        where = f"instrument {resource}: " if resource else ""
        if (
            isinstance(self.baud_rate, bool)
            or not isinstance(self.baud_rate, int)
            or self.baud_rate < 50
        ):
            raise ConnectError(
                f"{where}serial.baud_rate: must be an integer of at least 50, "
                f"got {self.baud_rate!r}"
            )
        if self.data_bits not in (5, 6, 7, 8):
            raise ConnectError(
                f"{where}serial.data_bits: must be 5, 6, 7 or 8, got {self.data_bits!r}"
            )
        if self.parity not in PARITIES:
            raise ConnectError(
                f"{where}serial.parity: must be one of {', '.join(PARITIES)}, got {self.parity!r}"
            )
        if self.stop_bits not in (1, 1.5, 2):
            raise ConnectError(
                f"{where}serial.stop_bits: must be 1, 1.5 or 2, got {self.stop_bits!r}"
            )
        if self.flow_control not in FLOW_CONTROLS:
            raise ConnectError(
                f"{where}serial.flow_control: must be one of {', '.join(FLOW_CONTROLS)}, "
                f"got {self.flow_control!r}"
            )


def visa_serial_kwargs(settings: SerialSettings) -> dict[str, Any]:
    """The keyword arguments pyvisa's ``open_resource`` takes for ``settings``."""
    from pyvisa import constants

    parity = {
        "none": constants.Parity.none,
        "odd": constants.Parity.odd,
        "even": constants.Parity.even,
        "mark": constants.Parity.mark,
        "space": constants.Parity.space,
    }[settings.parity]
    stop = {
        1: constants.StopBits.one,
        1.5: constants.StopBits.one_and_a_half,
        2: constants.StopBits.two,
    }[settings.stop_bits]
    flow = {
        "none": constants.ControlFlow.none,
        "xon_xoff": constants.ControlFlow.xon_xoff,
        "rts_cts": constants.ControlFlow.rts_cts,
        "dtr_dsr": constants.ControlFlow.dtr_dsr,
    }[settings.flow_control]
    return {
        "baud_rate": settings.baud_rate,
        "data_bits": settings.data_bits,
        "parity": parity,
        "stop_bits": stop,
        "flow_control": flow,
    }
