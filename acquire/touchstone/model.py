"""Value types of the Touchstone module: writer options, a parsed file, noise data."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np

from acquire.errors import TouchstoneError
from acquire.sweep import Sweep
from acquire.units import format_frequency

from .convert import SingularAt, to_s

#: Frequency units: name as written -> power of ten relative to Hz.
FREQ_UNITS = {"Hz": 0, "kHz": 3, "MHz": 6, "GHz": 9}
FORMATS = ("RI", "MA", "DB")
PARAMETERS = ("S", "Y", "Z", "H", "G")
WRITE_VERSIONS = ("1.1", "2.0")
#: Significant digits of the default (fast) writer.
DEFAULT_DIGITS = 15
#: Digits for a bit-exact round trip of binary64 values.
FULL_DIGITS = 17


def _read_only(array: np.ndarray, dtype: type) -> np.ndarray:
    out = np.array(array, dtype=dtype)
    out.flags.writeable = False
    return out


@dataclass(frozen=True)
class TouchstoneOptions:
    """How :func:`write_touchstone` lays out a file.

    ``version`` "1.1" is the keyword-free form (one ``R``, or one per port when they
    differ); "2.0" adds the bracketed keywords. ``precision`` is the number of
    significant digits: None is the fast default (15: relative error about 1e-14 in RI
    and MA, below 1e-12 in DB down to 1e-300); 17 or "full" round-trips binary64 bit
    for bit in RI (MA and DB go through log/trig). ``parameter`` "Y"/"Z" converts the S
    data before writing (normalised to R in version 1.1, absolute in 2.0).
    """

    version: str = "1.1"
    fmt: str = "RI"
    freq_unit: str = "Hz"
    precision: int | str | None = None
    parameter: str = "S"

    def __post_init__(self) -> None:
        if self.version not in WRITE_VERSIONS:
            raise TouchstoneError(
                f"touchstone options: version must be 1.1 or 2.0, got {self.version!r}")
        fmt = str(self.fmt).upper()
        if fmt not in FORMATS:
            raise TouchstoneError(f"touchstone options: fmt must be RI, MA or DB, got {self.fmt!r}")
        unit = {u.lower(): u for u in FREQ_UNITS}.get(str(self.freq_unit).lower())
        if unit is None:
            raise TouchstoneError("touchstone options: freq_unit must be Hz, kHz, MHz or GHz, "
                                  f"got {self.freq_unit!r}")
        param = str(self.parameter).upper()
        if param not in ("S", "Y", "Z"):
            raise TouchstoneError(
                f"touchstone options: parameter must be S, Y or Z, got {self.parameter!r}")
        precision = self.precision
        if precision == "full":
            precision = FULL_DIGITS
        if precision is not None and (
            isinstance(precision, bool) or not isinstance(precision, int)
            or not 1 <= precision <= FULL_DIGITS
        ):
            raise TouchstoneError(
                "touchstone options: precision must be None, 1..17 or 'full', "
                f"got {self.precision!r}")
        object.__setattr__(self, "fmt", fmt)
        object.__setattr__(self, "freq_unit", unit)
        object.__setattr__(self, "parameter", param)
        object.__setattr__(self, "precision", precision)

    @property
    def digits(self) -> int:
        """Significant digits actually written."""
        return DEFAULT_DIGITS if self.precision is None else int(self.precision)


@dataclass(frozen=True, eq=False)
class NoiseData:
    """Two-port noise parameters: minimum noise figure, optimum source reflection, Rn.

    ``rn_ohm`` is the effective noise resistance in ohms (version 1 files store it
    divided by the reference resistance; the reader multiplies it back).
    """

    freq_hz: np.ndarray
    nfmin_db: np.ndarray
    gamma_opt: np.ndarray
    rn_ohm: np.ndarray

    def __post_init__(self) -> None:
        for name, dtype in (("freq_hz", np.float64), ("nfmin_db", np.float64),
                            ("gamma_opt", np.complex128), ("rn_ohm", np.float64)):
            object.__setattr__(self, name, _read_only(getattr(self, name), dtype))


@dataclass(frozen=True, eq=False)
class TouchstoneFile:
    """A parsed Touchstone file, data as stored (Y/Z/H/G in ohms and siemens).

    ``meta`` holds the ``! key: value`` lines sweepd writes at the top; those lines, the
    ``written by sweepd`` marker and the blank separator are not repeated in
    ``comments``. ``mixed_mode`` lists the ``[Mixed-Mode Order]`` labels, if any.
    """

    freq_hz: np.ndarray
    data: np.ndarray
    parameter: str
    z0: tuple[float, ...]
    version: str
    fmt: str
    comments: tuple[str, ...] = ()
    meta: Mapping[str, Any] = field(default_factory=dict)
    noise: NoiseData | None = None
    warnings: tuple[str, ...] = ()
    mixed_mode: tuple[str, ...] = ()
    name: str = "<text>"

    def __post_init__(self) -> None:
        object.__setattr__(self, "freq_hz", _read_only(self.freq_hz, np.float64))
        object.__setattr__(self, "data", _read_only(self.data, np.complex128))
        object.__setattr__(self, "z0", tuple(float(z) for z in self.z0))
        object.__setattr__(self, "comments", tuple(self.comments))
        object.__setattr__(self, "warnings", tuple(self.warnings))
        object.__setattr__(self, "mixed_mode", tuple(self.mixed_mode))
        object.__setattr__(self, "meta", MappingProxyType(dict(self.meta)))

    @property
    def ports(self) -> int:
        return int(self.data.shape[1])

    def to_sweep(self) -> Sweep:
        """The data as S-parameters in a :class:`~acquire.sweep.Sweep` (meta carried over).

        Y and Z convert for any port count, H and G for two ports, all with the file's
        real reference resistances. Mixed-mode files are refused.
        """
        where = f"touchstone {self.name}"
        if self.mixed_mode:
            raise TouchstoneError(
                f"{where}: holds mixed-mode data ([Mixed-Mode Order] "
                f"{' '.join(self.mixed_mode)}); a sweep holds single-ended S-parameters only")
        if self.parameter in ("H", "G") and self.ports != 2:
            raise TouchstoneError(
                f"{where}: {self.parameter} parameters are defined for 2 ports, "
                f"file has {self.ports}")
        try:
            s = to_s(self.data, self.parameter, self.z0)
        except SingularAt as exc:
            raise TouchstoneError(
                f"{where}: {self.parameter} data at {format_frequency(self.freq_hz[exc.index])} "
                "have no S-parameters (singular matrix)") from None
        return Sweep(self.freq_hz, s, self.z0, self.meta)
