"""Adaptive frequency sampling: solve where a rational fit of the far field is least certain.

Glossary
--------
band
    ``AdaptiveBand``: the case's ``frequency_hz = { start, stop, adaptive_db,
    fit_points }``. The sweep starts from ``initial`` equally spaced
    frequencies (ends included) and adds frequencies until the fit is trusted.
channels
    The complex far field at every requested angle for every incident
    wave: one function of frequency per (angle, incident wave). Each channel
    is scaled by its largest magnitude over the solved frequencies, and the
    channels are compressed to their independent combinations (an SVD), so
    a handful of functions carries the whole far field.
fit
    A rational function in barycentric form with one denominator shared by
    every channel (the resonances of a body are the same at every angle):
    the support points are chosen by AAA (Nakatsukasa, Sete and Trefethen,
    SIAM J. Sci. Comput. 40 (2018); ``scipy.interpolate.AAA``) on a fixed
    random combination of the channels, the shared weights by the least-
    squares (Loewner) step of AAA taken over all channels at once. Each
    channel interpolates its values at the support points.
dB error
    ``|20 log10(max(|F1|, floor) / max(|F2|, floor))|``, the largest over the
    channels, with ``floor`` 40 dB below each channel's largest magnitude
    (``DYNAMIC_RANGE_DB``): the echo width in dB, compared where it matters.
certainty
    Leave-one-out: each solved frequency is predicted by the fit of all the
    others; the gap next to the worst-predicted frequency is halved next.
    The sweep stops when every interior solved frequency is predicted within
    ``adaptive_db`` by the others and the last new solves were predicted
    within ``adaptive_db`` by the fit before they were solved.
resonance
    A pole of the fit near the real axis inside the band: frequency
    ``Re p`` and width ``2 |Im p|`` (the full width at half power of a
    Lorentzian line).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from .problem import ProblemError
from .results import FrequencySolution

__all__ = [
    "CONFIRM",
    "DYNAMIC_RANGE_DB",
    "AdaptiveBand",
    "AdaptiveResult",
    "FarFieldFit",
    "Resonance",
    "adaptive_sweep",
    "db_error",
]

#: Range below each channel's peak over which the dB error is counted (common practice).
DYNAMIC_RANGE_DB = 40.0
#: New solves in a row that the fit must have predicted within ``adaptive_db`` before stopping.
CONFIRM = 2

ComplexArray = NDArray[np.complex128]


@dataclass(frozen=True)
class AdaptiveBand:
    """A band whose frequencies the sweep chooses itself.

    Attributes
    ----------
    start_hz, stop_hz
        The band's ends (both solved).
    adaptive_db
        Tolerance on the echo width in dB.
    fit_points
        Frequencies at which the fitted curve is written.
    initial
        Equally spaced frequencies solved first.
    max_solves
        The sweep never solves more frequencies than this.
    """

    start_hz: float
    stop_hz: float
    adaptive_db: float
    fit_points: int = 1000
    initial: int = 9
    max_solves: int = 200

    def __post_init__(self) -> None:
        if not (0 < self.start_hz < self.stop_hz and math.isfinite(self.stop_hz)):
            raise ProblemError(f"an adaptive band needs 0 < start < stop, got {self.start_hz}, {self.stop_hz}")
        if not self.adaptive_db > 0:
            raise ProblemError(f"adaptive_db must be positive, got {self.adaptive_db}")
        if self.fit_points < 2 or self.initial < 3 or self.max_solves < self.initial:
            raise ProblemError("an adaptive band needs fit_points >= 2, initial >= 3 and max_solves >= initial")

    def initial_hz(self) -> tuple[float, ...]:
        """The equally spaced frequencies solved first."""
        return tuple(float(f) for f in np.linspace(self.start_hz, self.stop_hz, self.initial))

    def fit_hz(self) -> NDArray[np.float64]:
        """The frequencies of the fitted curve."""
        return np.linspace(self.start_hz, self.stop_hz, self.fit_points)


@dataclass(frozen=True)
class Resonance:
    """A pole of the fit near the real axis: its frequency and width (Hz)."""

    frequency_hz: float
    width_hz: float


def db_error(a: ComplexArray, b: ComplexArray, peak: NDArray[np.float64]) -> float:
    """Largest echo-width difference in dB between ``a`` and ``b`` (``(..., channels)``), floored.

    ``peak`` is each channel's largest magnitude; values below
    ``DYNAMIC_RANGE_DB`` under it count as the floor.
    """
    floor = np.maximum(peak * 10 ** (-DYNAMIC_RANGE_DB / 20), 1e-300)
    ma = np.maximum(np.abs(a), floor)
    mb = np.maximum(np.abs(b), floor)
    return float(np.max(np.abs(20 * np.log10(ma / mb)))) if ma.size else 0.0


class FarFieldFit:
    """A rational fit of many channels with one shared denominator.

    Parameters
    ----------
    x
        Sample frequencies, scaled to [-1, 1] (``(n,)``).
    values
        Compressed channel values at ``x`` (``(n, r)``).
    rtol
        Relative tolerance of the AAA step (about the accuracy of the data).
    """

    def __init__(self, x: NDArray[np.float64], values: ComplexArray, rtol: float) -> None:
        from scipy.interpolate import AAA

        self.x = x
        self.values = values
        proxy = values @ _mixing(values.shape[1])
        with np.errstate(all="ignore"), warnings.catch_warnings():
            # AAA warns when it stops at max_terms; the shared weights are refitted below anyway
            warnings.simplefilter("ignore", RuntimeWarning)
            aaa = AAA(x.astype(complex), proxy, rtol=rtol, max_terms=max(2, x.size // 2 + 1), clean_up=False)
        support = np.asarray(aaa.support_points).real
        self.support_index = np.array([int(np.argmin(np.abs(x - s))) for s in support])
        self.z = x[self.support_index]
        self.fz = values[self.support_index]
        self.w = self._weights()

    def _weights(self) -> ComplexArray:
        """Shared weights: the smallest right singular vector of the stacked Loewner matrices."""
        m = self.z.size
        rest = np.setdiff1d(np.arange(self.x.size), self.support_index)
        if rest.size == 0:
            return np.ones(m, dtype=complex)
        cauchy = 1.0 / (self.x[rest, None] - self.z[None, :])
        blocks = [(self.values[rest, c, None] - self.fz[None, :, c]) * cauchy for c in range(self.values.shape[1])]
        loewner = np.vstack(blocks)
        _, _, vh = np.linalg.svd(loewner, full_matrices=False)
        return np.asarray(vh[-1].conj(), dtype=complex)

    def __call__(self, x: NDArray[np.float64]) -> ComplexArray:
        """Compressed channel values at scaled frequencies ``x`` (``(len(x), r)``)."""
        x = np.asarray(x, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            cauchy = 1.0 / (x[:, None] - self.z[None, :])
            out = (cauchy @ (self.w[:, None] * self.fz)) / (cauchy @ self.w)[:, None]
        hit = np.isinf(cauchy)
        rows, cols = np.nonzero(hit)
        out[rows] = self.fz[cols]
        return np.asarray(out)

    def poles(self) -> ComplexArray:
        """Poles (scaled frequencies): the finite eigenvalues of the barycentric arrowhead pencil."""
        from scipy.linalg import eigvals

        m = self.z.size
        e = np.zeros((m + 1, m + 1), dtype=complex)
        e[0, 1:] = self.w
        e[1:, 0] = 1.0
        e[1:, 1:] = np.diag(self.z)
        b = np.eye(m + 1, dtype=complex)
        b[0, 0] = 0.0
        with np.errstate(all="ignore"):
            vals = eigvals(e, b)
        return np.asarray(vals[np.isfinite(vals)])

    def strengths(self, poles: ComplexArray) -> NDArray[np.float64]:
        """Largest residue magnitude over the channels of each pole."""
        out = []
        for p in poles:
            c = 1.0 / (p - self.z)
            d_prime = -np.sum(self.w * c**2)
            out.append(float(np.max(np.abs((self.w * c) @ self.fz / d_prime))) if d_prime != 0 else 0.0)
        return np.array(out)


def _mixing(r: int) -> ComplexArray:
    """A fixed random combination of the channels (the same on every run)."""
    rng = np.random.default_rng(20180101)
    v = rng.standard_normal(r) + 1j * rng.standard_normal(r)
    return v / np.linalg.norm(v)


@dataclass
class AdaptiveResult:
    """What the adaptive sweep solved and fitted.

    Attributes
    ----------
    solutions
        The solved frequencies, sorted.
    fit_hz
        Frequencies of the fitted curve.
    fitted
        Fitted far field, ``(fit_points, n_angles, n_incidents)``.
    resonances
        Poles near the real axis in the band.
    history
        ``(frequency_hz, dB error of the fit's prediction before the solve)`` per added frequency.
    converged
        False when ``max_solves`` ended the sweep.
    leave_one_out_db
        The largest leave-one-out dB error of the final fit.
    """

    solutions: list[FrequencySolution]
    fit_hz: NDArray[np.float64]
    fitted: ComplexArray
    resonances: list[Resonance]
    history: list[tuple[float, float]] = field(default_factory=list)
    converged: bool = True
    leave_one_out_db: float = 0.0


class _Data:
    """Solved frequencies as compressed, scaled channels."""

    def __init__(self, band: AdaptiveBand, sols: dict[float, FrequencySolution]) -> None:
        self.freqs = np.array(sorted(sols))
        self.shape = sols[self.freqs[0]].farfield.shape
        raw = np.array([sols[f].farfield.ravel() for f in self.freqs])
        self.peak = np.max(np.abs(raw), axis=0)
        self.scale = np.where(self.peak > 0, self.peak, 1.0)
        scaled = raw / self.scale
        u, s, vh = np.linalg.svd(scaled, full_matrices=False)
        keep = s > 1e-12 * s[0] if s.size and s[0] > 0 else np.zeros(s.size, dtype=bool)
        keep[0] = True
        self.g = u[:, keep] * s[keep]
        self.vh = vh[keep]
        self.center = 0.5 * (band.start_hz + band.stop_hz)
        self.half = 0.5 * (band.stop_hz - band.start_hz)
        self.x = (self.freqs - self.center) / self.half

    def expand(self, g: ComplexArray) -> ComplexArray:
        """Channel values (unscaled) from compressed ones."""
        return np.asarray((g @ self.vh) * self.scale)

    def fit(self, rows: NDArray[np.int64] | None, rtol: float) -> FarFieldFit:
        sel = np.arange(self.x.size) if rows is None else rows
        return FarFieldFit(self.x[sel], self.g[sel], rtol)

    def leave_one_out(self, rtol: float) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Where the fit is uncertain: the fits without one interior frequency against the full fit.

        For each interior solved frequency ``j``, the fit of all the others is
        compared with the fit of all, in dB, at the quarter points of the two
        gaps beside ``j`` (which that fit has to bridge). Returns the
        frequencies probed (three per gap) and the largest dB difference at each.
        """
        n = self.x.size
        full = self.fit(None, rtol)
        quarter = np.array([0.25, 0.5, 0.75])
        probes = (self.x[:-1, None] + quarter[None, :] * np.diff(self.x)[:, None]).ravel()
        reference = self.expand(full(probes))
        score = np.zeros(probes.size)
        for j in range(1, n - 1):
            fit = self.fit(np.delete(np.arange(n), j), rtol)
            near = np.arange(3 * (j - 1), 3 * (j + 1))
            values = self.expand(fit(probes[near]))
            for k, idx in enumerate(near):
                err = db_error(values[k : k + 1], reference[idx : idx + 1],
                               self.peak)
                score[idx] = max(score[idx], err)
        return self.center + self.half * probes, score


def _next_frequencies(probes: NDArray[np.float64], score: NDArray[np.float64], tol: float, count: int,
                      min_gap: float) -> list[float]:
    """The most uncertain probe frequency of each of the ``count`` worst gaps."""
    gaps = []
    for g in range(probes.size // 3):
        block = score[3 * g : 3 * g + 3]
        width = 2 * (probes[3 * g + 2] - probes[3 * g])
        k = int(np.argmax(block))
        if width > 2 * min_gap and block[k] >= tol:
            gaps.append((float(block[k]), float(probes[3 * g + k])))
    gaps.sort(reverse=True)
    return [f for _, f in gaps[:count]]


def adaptive_sweep(
    band: AdaptiveBand,
    solve: Callable[[Sequence[float]], dict[float, FrequencySolution] | None],
    *,
    rtol: float = 1e-9,
    batch: int = 1,
) -> AdaptiveResult | None:
    """Solve the band's frequencies adaptively and fit the far field.

    Parameters
    ----------
    band
        The band and its tolerance.
    solve
        Solves a list of frequencies and returns their solutions, or None
        when the sweep was asked to stop.
    rtol
        Relative tolerance of the AAA step (about the accuracy of the solutions).
    batch
        Frequencies added per round (the workers of a cluster).

    Returns
    -------
    AdaptiveResult or None
        None when ``solve`` reported a stop.
    """
    tol = band.adaptive_db
    min_gap = (band.stop_hz - band.start_hz) / (band.fit_points - 1)
    first = solve(list(band.initial_hz()))
    if first is None:
        return None
    sols = dict(first)
    history: list[tuple[float, float]] = []
    converged = False
    while True:
        data = _Data(band, sols)
        probes, score = data.leave_one_out(rtol)
        trusted = float(np.max(score)) < tol
        confirmed = len(history) >= CONFIRM and all(e < tol for _, e in history[-CONFIRM:])
        if trusted and confirmed:
            converged = True
            break
        room = band.max_solves - len(sols)
        if room <= 0:
            break
        nxt = _next_frequencies(probes, score, tol, min(batch, room), min_gap)
        if not nxt:
            # every gap is trusted (or too narrow to split): check the fit in the middle of the widest gaps
            mids = np.zeros(score.size)
            mids[1::3] = np.repeat(np.diff(data.freqs), 1) / (data.freqs[-1] - data.freqs[0]) + tol
            nxt = _next_frequencies(probes, mids, tol, min(batch, room), min_gap)
        if not nxt:
            break
        fit = data.fit(None, rtol)
        predicted = {f: data.expand(fit(np.array([(f - data.center) / data.half]))) for f in nxt}
        new = solve(nxt)
        if new is None:
            return None
        for f in nxt:
            actual = new[f].farfield.ravel()[None, :]
            history.append((f, db_error(predicted[f], actual, data.peak)))
        sols.update(new)
    data = _Data(band, sols)
    fit = data.fit(None, rtol)
    fit_hz = band.fit_hz()
    fitted = data.expand(fit((fit_hz - data.center) / data.half)).reshape((fit_hz.size, *data.shape))
    return AdaptiveResult(
        solutions=[sols[f] for f in data.freqs],
        fit_hz=fit_hz,
        fitted=fitted,
        resonances=_resonances(fit, data, band),
        history=history,
        converged=converged,
        leave_one_out_db=float(np.max(data.leave_one_out(rtol)[1])),
    )


def _resonances(fit: FarFieldFit, data: _Data, band: AdaptiveBand) -> list[Resonance]:
    """Poles inside the band, closer to the real axis than a tenth of the band, that matter.

    A pole matters when its peak contribution (residue over distance to the
    axis) reaches 1e-3 of the largest compressed value: spurious pole-zero
    pairs of the fit have residues near zero.
    """
    poles = fit.poles()
    if poles.size == 0:
        return []
    strength = fit.strengths(poles)
    top = float(np.max(np.abs(data.g))) or 1.0
    out = []
    for p, s in zip(poles, strength):
        if abs(p.real) > 1 or abs(p.imag) > 0.2 or abs(p.imag) == 0:
            continue
        if s / abs(p.imag) < 1e-3 * top:
            continue
        out.append(Resonance(float(data.center + data.half * p.real), float(2 * data.half * abs(p.imag))))
    return sorted(out, key=lambda r: r.frequency_hz)
