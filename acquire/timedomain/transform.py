"""Inverse transform of a reflection sweep to the time domain (band-pass and low-pass).

Relations (discrete Fourier transform; Oppenheim & Schafer, Discrete-Time Signal
Processing; summarised in the shared reference note on time domain): a sweep of N points
from f1 to f2 has span B = f2 - f1 and step df = B / (N - 1); zero-padded to ``n_fft``
points the time step is dt = 1 / (n_fft * df) and the response repeats every T = 1 / df
(round trip), so the alias-free one-way range is v * T / 2 = v * (N - 1) / (2 * B).

- **Band-pass** (any f1 > 0): window the N points, zero-pad, inverse FFT. The result is a
  complex impulse response; its magnitude locates reflections, its sign is lost (an
  open and a short look alike). Time resolution 1 / B (rectangular window).
- **Low-pass** (harmonic grid f_k = k * df, k = 1..N, or k = 0..N with the DC point
  measured): the DC point is estimated when absent, the spectrum is mirrored as its
  complex conjugate (Hermitian), windowed with the right half of a symmetric window and
  inverse transformed into a *real* impulse response whose sign tells a step down in
  impedance (negative) from a step up; its running sum is the step response, which reads
  as the reflection coefficient along the line. Time resolution 1 / (2 * f2): the
  mirrored spectrum is twice as wide.
  A grid that is not harmonic is refused (``TransformError`` naming start and step and
  the two ways out: sweep from ``start = step`` or use band-pass). It is not resampled:
  interpolating a long line's fast-turning phase onto another grid would invent data.

Scaling: a single reflection of coefficient rho at a delay that falls on a bin reads rho
(band-pass: magnitude; low-pass: signed), whatever the window and padding.

The last sixteenth of the period is not shown: it holds the negative-time half of the
lobe of a reflection at the reference plane, wrapped around by the FFT.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property, lru_cache

import numpy as np

from acquire.timedomain.windows import DEFAULT_WINDOW, WindowInfo, half, symmetric, window_info
from drivers.errors import SweepdError

MODES = ("bandpass", "lowpass")
HARMONIC_RTOL = 1e-6  # start may differ from the step by this relative amount
GRID_RTOL = 1e-6  # points may deviate from the linear grid by this fraction of a step
MIN_POINTS = 8
WRAP_GUARD = 16  # the last 1/WRAP_GUARD of the period is not shown


class TransformError(SweepdError):
    """The sweep cannot be transformed as asked (grid, points, mode)."""


@dataclass(frozen=True)
class TransformSettings:
    """How to transform: mode, window and zero-padding factor."""

    mode: str = "bandpass"
    window: str = DEFAULT_WINDOW
    padding: int = 8  # n_fft is the next power of two at or above padding * points

    def to_dict(self) -> dict[str, object]:
        return {"mode": self.mode, "window": self.window, "padding": self.padding}


@dataclass(frozen=True)
class TimeResponse:
    """The transform of one reflection sweep, on a round-trip time axis from 0."""

    mode: str
    window: WindowInfo
    time_s: np.ndarray  # round-trip time of each shown bin
    impulse: np.ndarray  # complex (band-pass) or real (low-pass); a reflection rho reads rho
    step: np.ndarray | None  # low-pass: reflection coefficient along the line
    kernel_db: np.ndarray  # the window's response (dB) against bin offset, for sidelobes
    points: int
    n_fft: int
    start_hz: float
    stop_hz: float
    step_hz: float
    dc_estimated: float | None  # low-pass: the DC value used when it was not measured

    @property
    def span_hz(self) -> float:
        return self.stop_hz - self.start_hz

    @property
    def period_s(self) -> float:
        """Round-trip time before the response repeats: 1 / df."""
        return 1.0 / self.step_hz

    @property
    def bin_s(self) -> float:
        return 1.0 / (self.n_fft * self.step_hz)

    @property
    def resolution_s(self) -> float:
        """Round-trip time resolution with a rectangular window (1/B or 1/(2 f2))."""
        return 1.0 / (2.0 * self.stop_hz) if self.mode == "lowpass" else 1.0 / self.span_hz

    @cached_property
    def level_db(self) -> np.ndarray:
        """20 log10 |impulse|: the reflection level at each time (negative dB)."""
        with np.errstate(divide="ignore"):
            return 20.0 * np.log10(np.abs(self.impulse))


def transform(freq_hz: np.ndarray, gamma: np.ndarray,
              settings: TransformSettings = TransformSettings()) -> TimeResponse:
    """Transform a reflection sweep ``gamma`` on ``freq_hz`` (see the module notes)."""
    f = np.asarray(freq_hz, dtype=np.float64)
    g = np.asarray(gamma, dtype=np.complex128)
    step_hz = _linear_step(f)
    if not np.all(np.isfinite(g)):
        k = int(np.argmax(~np.isfinite(g)))
        raise TransformError(f"reflection is not a finite number at point {k} ({f[k]:.9g} Hz)")
    if settings.mode == "bandpass":
        return _bandpass(f, g, step_hz, settings)
    if settings.mode == "lowpass":
        return _lowpass(f, g, step_hz, settings)
    raise TransformError(f"unknown mode {settings.mode!r}; use {' or '.join(MODES)}")


def _linear_step(f: np.ndarray) -> float:
    if f.ndim != 1 or f.size < MIN_POINTS:
        raise TransformError(f"a time-domain transform needs at least {MIN_POINTS} points, "
                             f"the sweep has {f.size}")
    step = (f[-1] - f[0]) / (f.size - 1)
    if not step > 0:
        raise TransformError("the sweep's frequencies must rise")
    off = np.abs(f - (f[0] + step * np.arange(f.size)))
    if off.max() > GRID_RTOL * step:
        k = int(np.argmax(off))
        raise TransformError(
            f"the sweep is not on a linear frequency grid (point {k} at {f[k]:.9g} Hz is "
            f"{off[k] / step:.3g} steps off); a transform needs equal steps"
        )
    return float(step)


def _n_fft(padding: int, minimum: int) -> int:
    return 1 << int(np.ceil(np.log2(max(padding, 1) * minimum)))


def _shown(n_fft: int) -> int:
    return n_fft - n_fft // WRAP_GUARD


def _bandpass(f: np.ndarray, g: np.ndarray, step_hz: float,
              settings: TransformSettings) -> TimeResponse:
    w = _window("bandpass", settings.window, f.size)
    n_fft = _n_fft(settings.padding, f.size)
    h = np.fft.ifft(w * g, n_fft) * (n_fft / w.sum())
    shown = _shown(n_fft)
    return TimeResponse(
        "bandpass", window_info(settings.window, w.size), np.arange(shown) / (n_fft * step_hz),
        h[:shown], None, _kernel_db("bandpass", settings.window, f.size, n_fft), f.size,
        n_fft, float(f[0]), float(f[-1]), step_hz, None,
    )


def _lowpass(f: np.ndarray, g: np.ndarray, step_hz: float,
             settings: TransformSettings) -> TimeResponse:
    dc_measured = abs(f[0]) <= HARMONIC_RTOL * step_hz
    if not dc_measured and abs(f[0] - step_hz) > HARMONIC_RTOL * step_hz:
        raise TransformError(
            f"low-pass mode needs a harmonic grid (start equal to the step, or 0 Hz); this "
            f"sweep starts at {f[0]:.9g} Hz with a step of {step_hz:.9g} Hz: sweep from "
            f"start = stop / points, or use band-pass mode"
        )
    dc = None
    if dc_measured:
        spectrum = g.copy()
        spectrum[0] = spectrum[0].real
    else:
        dc = estimate_dc(g)
        spectrum = np.concatenate([[dc], g])
    w = _window("lowpass", settings.window, spectrum.size)
    n_fft = _n_fft(settings.padding, 2 * spectrum.size)
    raw = np.fft.irfft(w * spectrum, n_fft)  # sums to w[0] * spectrum[0] = DC value
    guard = n_fft // WRAP_GUARD
    step = np.cumsum(np.roll(raw, guard))[guard:]  # start the running sum at -guard bins
    shown = _shown(n_fft)
    return TimeResponse(
        "lowpass", window_info(settings.window, 2 * w.size - 1),
        np.arange(shown) / (n_fft * step_hz),
        raw[:shown] * _lowpass_scale(w, n_fft), step[:shown],
        _kernel_db("lowpass", settings.window, spectrum.size, n_fft), f.size, n_fft,
        0.0 if dc_measured else float(f[0] - step_hz), float(f[-1]), step_hz,
        None if dc is None else float(dc),
    )


def estimate_dc(gamma: np.ndarray) -> float:
    """Real reflection at 0 Hz from the two lowest points of a harmonic sweep.

    Magnitude and unwrapped phase are each extrapolated linearly to 0 Hz; the phase is
    then snapped to 0 or 180 degrees (at DC a passive one-port reflects a real value)
    and the magnitude kept within [0, 1].
    """
    mag = np.clip(2.0 * abs(gamma[0]) - abs(gamma[1]), 0.0, 1.0)
    phase = np.unwrap(np.angle(gamma[:2]))
    phase0 = 2.0 * phase[0] - phase[1]
    return float(mag if np.cos(phase0) >= 0 else -mag)


@lru_cache(maxsize=16)
def _window(mode: str, name: str, n: int) -> np.ndarray:
    """The window over the sweep (band-pass) or its right half from DC (low-pass); cached."""
    w = symmetric(name, n) if mode == "bandpass" else half(name, n)
    w.setflags(write=False)
    return w


@lru_cache(maxsize=16)
def _kernel_db(mode: str, name: str, n: int, n_fft: int) -> np.ndarray:
    """The transform of the window alone (dB; 0 dB for a reflection of 1), cached."""
    w = _window(mode, name, n)
    if mode == "bandpass":
        kernel = np.abs(np.fft.ifft(w, n_fft)) * (n_fft / w.sum())
    else:
        kernel = np.abs(np.fft.irfft(w, n_fft)) * _lowpass_scale(w, n_fft)
    result = _db(kernel)
    result.setflags(write=False)
    return result


def _lowpass_scale(w: np.ndarray, n_fft: int) -> float:
    """Makes a reflection rho read rho: irfft sums w0 + 2 (w1 + ... + wN) per unit."""
    return n_fft / (w[0] + 2.0 * w[1:].sum())


def _db(values: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(np.maximum(values, 1e-300))
