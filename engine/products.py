"""What radar and sonar engineers make of the far field: down-range profiles and images.

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

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import NDArray

__all__ = [
    "WINDOWS", "ImageRequest", "Window", "RadarImage", "RangeProfile", "RangeProfileRequest", "back_projection",
    "range_profile", "uniform_step",
]

ComplexArray = NDArray[np.complex128]
FloatArray = NDArray[np.float64]

WINDOWS = ("hann", "rectangular", "taylor")
Window = Literal["hann", "rectangular", "taylor"]
#: Relative deviation of frequency steps still taken as uniform.
STEP_TOLERANCE = 1e-6


@dataclass(frozen=True)
class RangeProfileRequest:
    """``[range_profile]``: window, Taylor side-lobe level (dB, positive) and zero-padding factor."""

    window: Window = "hann"
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


def _window(kind: Window, sidelobe_db: float, n: int) -> FloatArray:
    from scipy.signal import windows

    if kind == "rectangular":
        return np.ones(n)
    if kind == "hann":
        return windows.hann(n, sym=True) if n > 2 else np.ones(n)
    return windows.taylor(n, nbar=4, sll=sidelobe_db, norm=True, sym=True)


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
    w = _window(request.window, request.sidelobe_db, n)
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


@dataclass(frozen=True)
class ImageRequest:
    """``[image]``: grid in the drawing's coordinates, window, and the plotted dynamic range (dB)."""

    x_m: FloatArray
    y_m: FloatArray
    window: Window = "hann"
    sidelobe_db: float = 35.0
    dynamic_range_db: float = 40.0


@dataclass(frozen=True)
class RadarImage:
    """Complex image ``(ny, nx)`` on the request's grid, with its resolutions."""

    values: ComplexArray
    down_range_m: float
    cross_range_m: float


def back_projection(
    frequencies_hz: FloatArray, from_deg: FloatArray, monostatic: ComplexArray, wave_speed_m_s: float,
    request: ImageRequest,
) -> RadarImage:
    """Image of the monostatic far field over frequency (rows) and incidence (columns) by back-projection.

    A point at ``p`` backscatters ``exp(2 j k r_i . p)`` (``r_i`` the unit
    vector toward the radar), so the matched sum
    ``I(q) = sum w_f w_a F(f, a) exp(-2 j k_f r_a . q) / sum w_f w_a`` peaks
    at ``q = p`` with the point's amplitude: an exact back-projection, no
    reformatting error. Resolution: down-range ``c / (2 B)``, cross-range
    ``lambda_c / (2 dphi)`` (``dphi`` the angular aperture in radians,
    ``lambda_c`` at the centre frequency; standard radar practice); with an
    aperture of 180 degrees or more, ``lambda_c / 4``.
    """
    f = np.asarray(frequencies_hz, dtype=float)
    a = np.deg2rad(np.asarray(from_deg, dtype=float))
    fo, ao = np.argsort(f), np.argsort(a)
    f, a = f[fo], a[ao]
    data = np.asarray(monostatic, dtype=complex)[np.ix_(fo, ao)]
    w = (_window(request.window, request.sidelobe_db, f.size)[:, None]
         * _window(request.window, request.sidelobe_db, a.size)[None, :])
    weighted = (data * w).ravel()
    k2 = (4 * np.pi * f / wave_speed_m_s)[:, None]  # 2 k
    ux = (k2 * np.cos(a)[None, :]).ravel()
    uy = (k2 * np.sin(a)[None, :]).ravel()
    x, y = request.x_m, request.y_m
    image = np.zeros((y.size, x.size), dtype=complex)
    block = max(1, 2_000_000 // max(weighted.size * x.size, 1))
    ex = np.exp(-1j * np.outer(ux, x))  # (n_samples, nx)
    for lo in range(0, y.size, block):
        ey = np.exp(-1j * np.outer(y[lo : lo + block], uy))  # (rows, n_samples)
        image[lo : lo + block] = (ey * weighted[None, :]) @ ex
    image /= np.sum(w)
    band = float(f[-1] - f[0]) if f.size > 1 else 0.0
    aperture = float(a[-1] - a[0]) if a.size > 1 else 0.0
    lam_c = wave_speed_m_s / (0.5 * (f[0] + f[-1]))
    down = wave_speed_m_s / (2 * band) if band > 0 else math.inf
    cross = lam_c / 4 if aperture >= np.pi else (lam_c / (2 * aperture) if aperture > 0 else math.inf)
    return RadarImage(image, down, cross)
