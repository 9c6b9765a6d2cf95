"""What radar and sonar engineers make of the far field: down-range profiles.

Glossary
--------
range
    Distance along the look direction from the drawing's origin, positive
    away from the radar: a scatterer at ``p`` seen by a wave "from"
    ``phi_i`` sits at ``R = -p . (cos phi_i, sin phi_i)``. Its backscatter
    varies as ``exp(-j 4 pi f R / c)`` over frequency (``exp(+j w t)``).
range profile
    The windowed inverse transform of the monostatic far field over a
    uniform frequency sweep, zero-padded: a peak at each scatterer's range.
    Resolution ``c / (2 B)`` with ``B`` the swept band (standard radar
    practice; ``c`` the wave speed of the medium, the sound speed for
    sonar); unambiguous over ``c / (2 df)``. Magnitudes are normalised by
    the window's sum, so an isolated point scatterer keeps its far-field
    amplitude (sqrt(m) per unit incident amplitude).
windows
    ``hann`` (default; first side lobe -31.5 dB), ``rectangular`` (-13.3 dB)
    and ``taylor`` with the side-lobe level asked for (scipy.signal.windows,
    four nearly equal side lobes).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import NDArray

__all__ = ["WINDOWS", "RangeProfile", "RangeProfileRequest", "range_profile", "uniform_step"]

ComplexArray = NDArray[np.complex128]
FloatArray = NDArray[np.float64]

WINDOWS = ("hann", "rectangular", "taylor")
#: Relative deviation of frequency steps still taken as uniform.
STEP_TOLERANCE = 1e-6


@dataclass(frozen=True)
class RangeProfileRequest:
    """``[range_profile]``: window, Taylor side-lobe level (dB, positive) and zero-padding factor."""

    window: Literal["hann", "rectangular", "taylor"] = "hann"
    sidelobe_db: float = 35.0
    padding: int = 8


@dataclass(frozen=True)
class RangeProfile:
    """Profiles ``(n_ranges, n_waves)`` at ``range_m``, with the resolution and unambiguous extent."""

    range_m: FloatArray
    magnitude: FloatArray
    resolution_m: float
    unambiguous_m: float
    bandwidth_hz: float


def uniform_step(frequencies_hz: FloatArray) -> float | None:
    """The step of a uniform, increasing sweep of at least 4 frequencies, else None."""
    f = np.asarray(frequencies_hz, dtype=float)
    if f.size < 4:
        return None
    steps = np.diff(f)
    if np.any(steps <= 0) or np.ptp(steps) > STEP_TOLERANCE * steps.mean():
        return None
    return float(steps.mean())


def _window(request: RangeProfileRequest, n: int) -> FloatArray:
    from scipy.signal import windows

    if request.window == "rectangular":
        return np.ones(n)
    if request.window == "hann":
        return windows.hann(n, sym=True) if n > 2 else np.ones(n)
    return windows.taylor(n, nbar=4, sll=request.sidelobe_db, norm=True, sym=True)


def range_profile(
    frequencies_hz: FloatArray, monostatic: ComplexArray, wave_speed_m_s: float, request: RangeProfileRequest
) -> RangeProfile:
    """Down-range profiles of every wave (columns of ``monostatic``, one row per frequency).

    Raises
    ------
    ValueError
        If the frequencies are not a uniform increasing sweep of at least four.
    """
    f = np.asarray(frequencies_hz, dtype=float)
    step = uniform_step(f)
    if step is None:
        raise ValueError("a range profile needs a uniform sweep of at least four frequencies")
    n = f.size
    w = _window(request, n)
    n_fft = int(2 ** np.ceil(np.log2(max(n * request.padding, n))))
    data = np.asarray(monostatic, dtype=complex).reshape(n, -1) * w[:, None]
    # |P(R)| = |sum_n w_n F_n exp(+j 4 pi f_n R / c)| at R_m = m c / (2 df n_fft): an inverse DFT
    # (the start frequency only adds a phase)
    spectrum = np.fft.ifft(data, n=n_fft, axis=0) * n_fft / np.sum(w)
    unambiguous = wave_speed_m_s / (2 * step)
    ranges = np.fft.fftfreq(n_fft, d=1.0 / n_fft) * unambiguous / n_fft
    order = np.argsort(ranges)
    band = float(f[-1] - f[0])
    return RangeProfile(ranges[order], np.abs(spectrum)[order], wave_speed_m_s / (2 * band), unambiguous, band)
