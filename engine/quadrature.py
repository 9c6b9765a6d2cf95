"""Panel quadrature: Gauss-Legendre rules and kernel-split product weights.

Glossary
--------
panel parameter
    Each panel is the image of ``t`` in [-1, 1]; its ``p`` nodes sit at the
    Gauss-Legendre points of that interval.
self weights
    ``W[i, j]`` with ``sum_j W[i, j] f(t_j) = int_{-1}^{1} f(t) log|t - t_i| dt``
    for polynomials ``f`` of degree below ``p``: the log part of a kernel
    whose target is node ``i`` of the same panel.
near weights
    Complex-variable product weights for targets off the panel but close to
    it: the log kernel ``log|tau - z|`` and the Cauchy kernel
    ``1 / (tau - z)``, from the monomial recursions of Helsing & Ojala
    (J. Comput. Phys. 227, 2008) as used in Helsing & Holst, "Variants of an
    explicit kernel-split panel-based Nystrom discretization scheme for
    Helmholtz boundary value problems" (Adv. Comput. Math. 41, 2015).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from numpy.polynomial import legendre
from numpy.typing import NDArray

__all__ = [
    "NEAR_RADIUS",
    "differentiation_matrix",
    "gauss_legendre",
    "interpolation_matrix",
    "legendre_analysis_matrix",
    "near_weights",
    "self_cauchy_weights",
    "self_log_weights",
]

FloatArray = NDArray[np.float64]
ComplexArray = NDArray[np.complex128]

#: Targets closer to a panel's centre than this many half-lengths get
#: product weights; beyond it p-point Gauss-Legendre is accurate to about
#: rho^(-2p) with rho >= 3.3 for p = 16, below 1e-16.
NEAR_RADIUS = 1.8


@lru_cache(maxsize=8)
def gauss_legendre(p: int) -> tuple[FloatArray, FloatArray]:
    """Nodes and weights of the ``p``-point Gauss-Legendre rule on [-1, 1].

    Examples
    --------
    >>> x, w = gauss_legendre(4)
    >>> round(float(w.sum()), 14)
    2.0
    """
    x, w = legendre.leggauss(p)
    x.setflags(write=False)
    w.setflags(write=False)
    return x, w


def _barycentric_weights(nodes: FloatArray) -> FloatArray:
    diff = nodes[:, None] - nodes[None, :]
    np.fill_diagonal(diff, 1.0)
    return 1.0 / np.prod(diff, axis=1)


def interpolation_matrix(nodes: FloatArray, targets: FloatArray) -> FloatArray:
    """Matrix mapping values at ``nodes`` to the interpolant's values at ``targets``.

    Barycentric Lagrange interpolation (Berrut & Trefethen, SIAM Review 46, 2004).
    """
    nodes = np.asarray(nodes, dtype=float)
    targets = np.atleast_1d(np.asarray(targets, dtype=float))
    bw = _barycentric_weights(nodes)
    diff = targets[:, None] - nodes[None, :]
    exact = diff == 0.0
    diff[exact] = 1.0
    terms = bw / diff
    mat = terms / terms.sum(axis=1, keepdims=True)
    rows = np.any(exact, axis=1)
    mat[rows] = exact[rows].astype(float)
    return mat


@lru_cache(maxsize=8)
def differentiation_matrix(p: int) -> FloatArray:
    """``D`` with ``(D f)_i = f'(t_i)`` for polynomials of degree below ``p``."""
    x, _ = gauss_legendre(p)
    bw = _barycentric_weights(x)
    diff = x[:, None] - x[None, :]
    np.fill_diagonal(diff, 1.0)
    d = (bw[None, :] / bw[:, None]) / diff
    np.fill_diagonal(d, 0.0)
    np.fill_diagonal(d, -d.sum(axis=1))
    d.setflags(write=False)
    return d


@lru_cache(maxsize=8)
def legendre_analysis_matrix(p: int) -> FloatArray:
    """Matrix taking node values to Legendre coefficients (exact for degree < p)."""
    x, w = gauss_legendre(p)
    vander = legendre.legvander(x, p - 1)  # (p, p): P_k(x_j)
    norms = (2.0 * np.arange(p) + 1.0) / 2.0
    mat = (vander * w[:, None]).T * norms[:, None]
    mat.setflags(write=False)
    return mat


def _log_moments_one_side(s: float, p: int) -> FloatArray:
    """``int_s^1 P_k(t) log(t - s) dt`` for k < p, accurate to rounding.

    Composite Gauss-Legendre on a geometric mesh toward the singularity:
    each level is smooth, and the levels below 2^-60 add less than 1e-17.
    """
    length = 1.0 - s
    if length <= 0.0:
        return np.zeros(p)
    xg, wg = gauss_legendre(24)
    edges = length * np.concatenate([[0.0], 2.0 ** -np.arange(60, -1, -1.0)])
    a = edges[:-1, None]
    b = edges[1:, None]
    u = a + (b - a) * 0.5 * (xg + 1.0)  # (levels, nodes), all levels in one evaluation
    vals = legendre.legvander(s + u, p - 1) * np.log(u)[:, :, None]
    parts = 0.5 * (b - a) * np.einsum("j,ljk->lk", wg, vals)
    total = np.zeros(p)
    for part in parts:  # smallest level first, as the levels shrink toward s
        total += part
    return total


@lru_cache(maxsize=8)
def self_log_weights(p: int) -> FloatArray:
    """Product weights for ``log|t - t_i|`` with the target at node ``i``.

    Returns ``W`` of shape ``(p, p)`` such that
    ``sum_j W[i, j] f(t_j)`` equals ``int_{-1}^{1} f(t) log|t - t_i| dt``
    for every polynomial ``f`` of degree below ``p``.

    Examples
    --------
    >>> W = self_log_weights(8)
    >>> x, _ = gauss_legendre(8)
    >>> exact = (1 - x[0]) * np.log(1 - x[0]) + (1 + x[0]) * np.log(1 + x[0]) - 2
    >>> bool(abs(W[0].sum() - exact) < 1e-13)
    True
    """
    x, _ = gauss_legendre(p)
    moments = np.empty((p, p))
    for i, s in enumerate(x):
        # int_{-1}^{1} P_k(t) log|t - s| dt = right side + mirrored left side,
        # using P_k(-t) = (-1)^k P_k(t).
        right = _log_moments_one_side(float(s), p)
        left = _log_moments_one_side(float(-s), p) * (-1.0) ** np.arange(p)
        moments[i] = right + left
    vander = legendre.legvander(x, p - 1)  # V[j, k] = P_k(x_j)
    # W V = M  ->  W = M V^-1
    weights = np.asarray(np.linalg.solve(vander.T, moments.T).T, dtype=np.float64)
    weights.setflags(write=False)
    return weights


def _arg_change(tn: ComplexArray, zn: ComplexArray) -> FloatArray:
    # A target exactly on the panel has no angle there: NaN, never a warning.
    with np.errstate(divide="ignore", invalid="ignore"):
        return _arg_change_unchecked(tn, zn)


def _arg_change_unchecked(tn: ComplexArray, zn: ComplexArray) -> FloatArray:
    """Change of ``arg(tau - z)`` along the (interpolated) panel from -1 to 1.

    The path runs through the end points, the nodes and the point of the
    panel closest to each target (found by Newton's method on the
    polynomial interpolant), so a target between the curve and the
    polygon of its nodes is still on the right side.
    """
    p = tn.size
    x, _ = gauss_legendre(p)
    path_t = np.concatenate([[-1.0], x, [1.0]])
    path = np.concatenate([[-1.0 + 0j], tn, [1.0 + 0j]])
    steps = np.angle((path[1:, None] - zn[None, :]) / (path[:-1, None] - zn[None, :]))
    # Only targets closer to the panel than its node spacing can fall between
    # the curve and the polygon of its nodes; find their foot points.
    dist = np.abs(tn[:, None] - zn[None, :])
    nearest = np.argmin(dist, axis=0)
    close = np.flatnonzero(dist[nearest, np.arange(zn.size)] < 4.0 / p)
    if close.size == 0:
        return steps.sum(axis=0)
    zc = zn[close]
    coef = legendre_analysis_matrix(p) @ tn
    basis = np.stack(
        [coef, np.append(legendre.legder(coef), 0.0), np.append(legendre.legder(coef, 2), [0.0, 0.0])],
        axis=1,
    )
    t = x[nearest[close]].copy()
    for _ in range(6):
        vals = legendre.legvander(t, p - 1) @ basis  # (m, 3): position, first, second derivative
        pos, d1, d2 = vals[:, 0], vals[:, 1], vals[:, 2]
        f = np.real((pos - zc) * np.conj(d1))
        fp = np.abs(d1) ** 2 + np.real((pos - zc) * np.conj(d2))
        step = np.where(fp > 0, f / np.where(fp > 0, fp, 1.0), 0.0)
        t = np.clip(t - step, -1.0, 1.0)
    foot = legendre.legvander(t, p - 1) @ coef
    seg = np.clip(np.searchsorted(path_t, t, side="right") - 1, 0, p)
    lo, hi = path[seg], path[seg + 1]
    steps[seg, close] = np.angle((foot - zc) / (lo - zc)) + np.angle((hi - zc) / (foot - zc))
    return steps.sum(axis=0)


def _legendre_q(n: int, x: float) -> FloatArray:
    """Legendre functions of the second kind ``Q_0(x) .. Q_n(x)`` for ``-1 < x < 1``.

    ``Q_0 = log((1 + x) / (1 - x)) / 2``, ``Q_1 = x Q_0 - 1`` and Bonnet's
    recurrence ``(k + 1) Q_{k+1} = (2k + 1) x Q_k - k Q_{k-1}`` (DLMF 14.5.22,
    14.10.3; from memory), run forward: inside (-1, 1) neither P_k nor Q_k
    dominates, so the forward recurrence is stable (the same values as
    ``scipy.special.lqn``, without importing scipy.special).

    Examples
    --------
    >>> q = _legendre_q(2, 0.5)
    >>> bool(abs(q[2] - (0.25 * 3 * 0.5 ** 2 * np.log(3.0) - 0.25 * np.log(3.0) - 0.75)) < 1e-15)
    True
    """
    out = np.empty(n + 1)
    out[0] = 0.5 * np.log((1.0 + x) / (1.0 - x))
    if n >= 1:
        out[1] = x * out[0] - 1.0
    for k in range(1, n):
        out[k + 1] = ((2 * k + 1) * x * out[k] - k * out[k - 1]) / (k + 1)
    return out


@lru_cache(maxsize=8)
def self_cauchy_weights(p: int) -> FloatArray:
    """Principal-value weights for ``1 / (t - t_i)`` with the target at node ``i``.

    ``sum_j W[i, j] f(t_j) = PV int_{-1}^{1} f(t) / (t - t_i) dt`` for
    polynomials of degree below ``p``, from
    ``PV int P_k(t) / (s - t) dt = 2 Q_k(s)`` (DLMF 14.17.? / Abramowitz &
    Stegun 8.8, Neumann's integral; from memory).

    Examples
    --------
    >>> W = self_cauchy_weights(6)
    >>> x, _ = gauss_legendre(6)
    >>> bool(abs(W[2].sum() - np.log((1 - x[2]) / (1 + x[2]))) < 1e-13)
    True
    """
    x, _ = gauss_legendre(p)
    moments = np.array([-2.0 * _legendre_q(p - 1, float(s)) for s in x])  # (p targets, p degrees)
    vander = legendre.legvander(x, p - 1)
    weights = np.linalg.solve(vander.T, moments.T).T
    weights.setflags(write=False)
    return weights


def near_weights(
    tau: ComplexArray,
    tau_t: ComplexArray,
    end_a: complex,
    end_b: complex,
    z: ComplexArray,
) -> tuple[FloatArray, ComplexArray]:
    """Product weights for targets ``z`` near (not on) one panel.

    Parameters
    ----------
    tau, tau_t
        Panel nodes and their derivative with respect to the panel
        parameter, as complex numbers ``x + i y``, shape ``(p,)``.
    end_a, end_b
        The panel's first and last points.
    z
        Targets, shape ``(m,)``.

    Returns
    -------
    log_w : ndarray, shape (m, p), real
        ``sum_j log_w[i, j] f_j`` approximates ``int f log|tau - z_i| ds``
        (``ds`` is arc length) for smooth complex ``f``.
    cauchy_w : ndarray, shape (m, p), complex
        ``sum_j cauchy_w[i, j] g_j`` approximates
        ``int g(tau) / (tau - z_i) dtau`` (complex line integral).

    Notes
    -----
    The panel is mapped so that its end points become -1 and 1; the
    monomial Cauchy moments obey ``q_{k+1} = z q_k + (1 - (-1)^k) / k``
    with ``q_1`` the change of ``log(tau - z)`` along the panel, which is
    tracked through the nodes so that targets between the curved panel and
    its chord get the right branch. Weights come from the transposed
    Vandermonde system of the mapped nodes. Because
    ``log|tau - z| |dtau| = Re[log(tau - z) dtau] |dtau| / dtau`` and
    ``|dtau| / dtau`` is smooth, the real log weights follow from the
    complex ones (Helsing & Ojala 2008).
    """
    p = tau.size
    center = 0.5 * (end_a + end_b)
    half = 0.5 * (end_b - end_a)
    tn = (tau - center) / half
    zn = (np.asarray(z, dtype=complex) - center) / half
    m = zn.size
    arg_change = _arg_change(tn, zn)
    log_end = np.log(1.0 - zn)
    log_start = np.log(-1.0 - zn)
    chord = log_end - log_start
    wind = np.round((arg_change - chord.imag) / (2.0 * np.pi))
    q = np.empty((p + 1, m), dtype=complex)
    q[0] = chord + 2j * np.pi * wind
    for k in range(1, p + 1):
        q[k] = zn * q[k - 1] + (1.0 - (-1.0) ** k) / k
    vander_t = np.vander(tn, p, increasing=True).T  # row k: tau_j^k
    cauchy = np.linalg.solve(vander_t, q[:p]).T  # (m, p)
    # Log moments: p_k = int tau^(k-1) log(tau - z) dtau
    #            = [tau^k log(tau - z)]_{-1}^{1} / k - q_{k+1} / k.
    kk = np.arange(1, p + 1)[:, None]
    log_moments = ((log_start + q[0])[None, :] - (-1.0) ** kk * log_start[None, :]) / kk - q[1:] / kk
    log_c = np.linalg.solve(vander_t, log_moments).T  # (m, p), in mapped variable
    tn_t = tau_t / half
    speed = np.abs(tau_t)
    _, wgl = gauss_legendre(p)
    log_w = np.log(abs(half)) * (wgl * speed)[None, :] + abs(half) * np.real(
        log_c * (np.abs(tn_t) / tn_t)[None, :]
    )
    return np.asarray(log_w, dtype=np.float64), np.asarray(cauchy, dtype=np.complex128)
