"""Bessel functions J0, Y0, J1, Y1 of real argument, compiled and cached by numba.

The algorithms and coefficients are those of the Cephes Math Library
(S. L. Moshier, *Methods and Programs for Mathematical Functions*, Ellis
Horwood 1989; Cephes release 2.8, files ``j0.c`` and ``j1.c``), the same
ones scipy.special uses for ``j0, y0, j1, y1``:

``0 < x <= 5``
    ``J0 = (x^2 - r1^2)(x^2 - r2^2) P(x^2) / Q(x^2)`` with ``r1, r2`` the
    first two zeros of J0; ``J1 = x (x^2 - s1^2)(x^2 - s2^2) P(x^2) / Q(x^2)``
    with ``s1, s2`` the first two zeros of J1;
    ``Y0 = R(x^2) + (2/pi) log(x) J0`` and
    ``Y1 = x R(x^2) + (2/pi) (J1 log(x) - 1/x)`` (rational ``R``; DLMF 10.8.2
    gives the logarithmic terms).
``x > 5``
    Hankel's asymptotic form (DLMF 10.17.3) with the modulus and phase
    factors ``P(25/x^2), Q(25/x^2)`` as rational functions of degree 6/6
    and 7/7: ``J_nu = sqrt(2/(pi x)) (P cos(chi) - (5/x) Q sin(chi))``,
    ``Y_nu = sqrt(2/(pi x)) (P sin(chi) + (5/x) Q cos(chi))``,
    ``chi = x - (2 nu + 1) pi/4``. From ``x >= 10`` the sine and cosine are
    taken of ``x`` itself and combined (``cos(x - pi/4) = (cos x + sin x)/sqrt 2``),
    so that the rounding of ``x - pi/4`` does not enter the phase.

Cephes states peak absolute errors of 4.2e-16 (J0), 1.3e-15 (Y0), 2.6e-16
(J1) and 1.0e-15 (Y1) on ``[0, 30]``. Functions compiled with numba's
``cache=True`` keep no process-specific address, so compiled callers
(``engine.kernels``, ``engine.nearfield``) can be cached to disk too.

Glossary
--------
jy01
    ``(J0, Y0, J1, Y1)`` at one ``x > 0`` in one call, sharing the
    logarithm, the rational functions and the sine and cosine.

Notes
-----
numba's on-disk cache of a function is invalidated only when the file that
defines that function changes. A compiled caller in another module keeps
its cached copy of these functions after an edit here; after editing this
file, remove the ``__pycache__/*.nbi``/``*.nbc`` files of the callers (or
touch their sources).
"""

from __future__ import annotations

import math
from typing import Any

import numba
import numpy as np
from numpy.typing import NDArray

__all__ = ["PARALLEL_MIN", "j0", "j0j1_array", "j1", "jy01", "jy01_array", "y0", "y1"]

# --- Coefficients (Cephes j0.c) -------------------------------------------
_J0_PP = (
    7.96936729297347051624e-4, 8.28352392107440799803e-2, 1.23953371646414299388e0,
    5.44725003058768775090e0, 8.74716500199817011941e0, 5.30324038235394892183e0,
    9.99999999999999997821e-1,
)
_J0_PQ = (
    9.24408810558863637013e-4, 8.56288474354474431428e-2, 1.25352743901058953537e0,
    5.47097740330417105182e0, 8.76190883237069594232e0, 5.30605288235394617618e0,
    1.00000000000000000218e0,
)
_J0_QP = (
    -1.13663838898469149931e-2, -1.28252718670509318512e0, -1.95539544257735972385e1,
    -9.32060152123768231369e1, -1.77681167980488050595e2, -1.47077505154951170175e2,
    -5.14105326766599330220e1, -6.05014350600728481186e0,
)
_J0_QQ = (  # leading coefficient 1 implied
    6.43178256118178023184e1, 8.56430025976980587198e2, 3.88240183605401609683e3,
    7.24046774195652478189e3, 5.93072701187316984827e3, 2.06209331660327847417e3,
    2.42005740240291393179e2,
)
_Y0_YP = (
    1.55924367855235737965e4, -1.46639295903971606143e7, 5.43526477051876500413e9,
    -9.82136065717911466409e11, 8.75906394395366999549e13, -3.46628303384729719441e15,
    4.42733268572569800351e16, -1.84950800436986690637e16,
)
_Y0_YQ = (  # leading coefficient 1 implied
    1.04128353664259848412e3, 6.26107330137134956842e5, 2.68919633393814121987e8,
    8.64002487103935000337e10, 2.02979612750105546709e13, 3.17157752842975028269e15,
    2.50596256172653059228e17,
)
#: Squares of the first two zeros of J0 (5.78318596294678452118, 30.4712623436620863991).
_J0_DR1 = 5.78318596294678452118e0
_J0_DR2 = 3.04712623436620863991e1
_J0_RP = (
    -4.79443220978201773821e9, 1.95617491946556577543e12, -2.49248344360967716204e14,
    9.70862251047306323952e15,
)
_J0_RQ = (  # leading coefficient 1 implied
    4.99563147152651017219e2, 1.73785401676374683123e5, 4.84409658339962045305e7,
    1.11855537045356834862e10, 2.11277520115489217587e12, 3.10518229857422583814e14,
    3.18121955943204943306e16, 1.71086294081043136091e18,
)

# --- Coefficients (Cephes j1.c) -------------------------------------------
_J1_RP = (
    -8.99971225705559398224e8, 4.52228297998194034323e11, -7.27494245221818276015e13,
    3.68295732863852883286e15,
)
_J1_RQ = (  # leading coefficient 1 implied
    6.20836478118054335476e2, 2.56987256757748830383e5, 8.35146791431949253037e7,
    2.21511595479792499675e10, 4.74914122079991414898e12, 7.84369607876235854894e14,
    8.95222336184627338078e16, 5.32278620332680085395e18,
)
_J1_PP = (
    7.62125616208173112003e-4, 7.31397056940917570436e-2, 1.12719608129684925192e0,
    5.11207951146807644818e0, 8.42404590141772420927e0, 5.21451598682361504063e0,
    1.00000000000000000254e0,
)
_J1_PQ = (
    5.71323128072548699714e-4, 6.88455908754495404082e-2, 1.10514232634061696926e0,
    5.07386386128601488557e0, 8.39985554327604159757e0, 5.20982848682361821619e0,
    9.99999999999999997461e-1,
)
_J1_QP = (
    5.10862594750176621635e-2, 4.98213872951233449420e0, 7.58238284132545283818e1,
    3.66779609360150777800e2, 7.10856304998926107277e2, 5.97489612400613639965e2,
    2.11688757100572135698e2, 2.52070205858023719784e1,
)
_J1_QQ = (  # leading coefficient 1 implied
    7.42373277035675149943e1, 1.05644886038262816351e3, 4.98641058337653607651e3,
    9.56231892404756170795e3, 7.99704160447350683650e3, 2.82619278517639096600e3,
    3.36093607810698293419e2,
)
_Y1_YP = (
    1.26320474790178026440e9, -6.47355876379160291031e11, 1.14509511541823727583e14,
    -8.12770255501325109621e15, 2.02439475713594898196e17, -7.78877196265950026825e17,
)
_Y1_YQ = (  # leading coefficient 1 implied
    5.94301592346128195359e2, 2.35564092943068577943e5, 7.34811944459721705660e7,
    1.87601316108706159478e10, 3.88231277496238566008e12, 6.20557727146953693363e14,
    6.87141087355300489866e16, 3.97270608116560655612e18,
)
#: Squares of the first two zeros of J1 (3.8317..., 7.0155...).
_J1_Z1 = 1.46819706421238932572e1
_J1_Z2 = 4.92184563216946036703e1

_PIO4 = 0.78539816339744830962  # pi/4
_THPIO4 = 2.35619449019234492885  # 3 pi/4
_SQ2OPI = 0.79788456080286535588  # sqrt(2/pi)
_SQ1OPI = 0.56418958354775628695  # 1/sqrt(pi)
_TWO_OVER_PI = 0.63661977236758134308  # 2/pi
_SQRT1_2 = 0.70710678118654752440  # 1/sqrt(2)


@numba.njit(cache=True)
def _poly(z: float, c: Any) -> float:
    """``c[0] z^n + ... + c[n]`` by Horner's rule (Cephes ``polevl``)."""
    acc = c[0]
    for i in range(1, len(c)):
        acc = acc * z + c[i]
    return acc


@numba.njit(cache=True)
def _poly1(z: float, c: Any) -> float:
    """``z^n + c[0] z^(n-1) + ... + c[n-1]`` (Cephes ``p1evl``, leading 1 implied)."""
    acc = z + c[0]
    for i in range(1, len(c)):
        acc = acc * z + c[i]
    return acc


@numba.njit(cache=True)
def _j0_small(x: float) -> float:
    """J0 on ``[0, 5]``."""
    z = x * x
    if x < 1.0e-5:
        return 1.0 - z / 4.0
    p = (z - _J0_DR1) * (z - _J0_DR2)
    return p * _poly(z, _J0_RP) / _poly1(z, _J0_RQ)


@numba.njit(cache=True)
def _j1_small(x: float) -> float:
    """J1 on ``[0, 5]``."""
    z = x * x
    w = _poly(z, _J1_RP) / _poly1(z, _J1_RQ)
    return w * x * (z - _J1_Z1) * (z - _J1_Z2)


@numba.njit(cache=True)
def _pq0(x: float) -> tuple[float, float]:
    """Modulus-phase factors ``P0`` and ``(5/x) Q0`` for ``x > 5``."""
    w = 5.0 / x
    q = 25.0 / (x * x)
    p = _poly(q, _J0_PP) / _poly(q, _J0_PQ)
    qq = _poly(q, _J0_QP) / _poly1(q, _J0_QQ)
    return p, w * qq


@numba.njit(cache=True)
def _pq1(x: float) -> tuple[float, float]:
    """Modulus-phase factors ``P1`` and ``(5/x) Q1`` for ``x > 5``."""
    w = 5.0 / x
    z = w * w
    p = _poly(z, _J1_PP) / _poly(z, _J1_PQ)
    q = _poly(z, _J1_QP) / _poly1(z, _J1_QQ)
    return p, w * q


@numba.njit(cache=True)
def j0(x: float) -> float:
    """Bessel function ``J0(x)`` of real ``x`` (even in ``x``).

    Examples
    --------
    Abramowitz & Stegun table 9.1 (from memory): J0(1) = 0.7651976866.

    >>> round(j0(1.0), 10)
    0.7651976866
    """
    if x < 0.0:
        x = -x
    if x <= 5.0:
        return _j0_small(x)
    p, wq = _pq0(x)
    if x < 10.0:
        xn = x - _PIO4
        return (p * math.cos(xn) - wq * math.sin(xn)) * _SQ2OPI / math.sqrt(x)
    return ((p + wq) * math.cos(x) + (p - wq) * math.sin(x)) * _SQ1OPI / math.sqrt(x)


@numba.njit(cache=True)
def y0(x: float) -> float:
    """Bessel function ``Y0(x)`` for ``x > 0`` (``-inf`` at 0, NaN below).

    Examples
    --------
    Abramowitz & Stegun table 9.1 (from memory): Y0(1) = 0.0882569642.

    >>> round(y0(1.0), 10)
    0.0882569642
    """
    if x <= 5.0:
        if x == 0.0:
            return -math.inf
        if not x > 0.0:
            return math.nan
        z = x * x
        w = _poly(z, _Y0_YP) / _poly1(z, _Y0_YQ)
        return w + _TWO_OVER_PI * math.log(x) * _j0_small(x)
    p, wq = _pq0(x)
    if x < 10.0:
        xn = x - _PIO4
        return (p * math.sin(xn) + wq * math.cos(xn)) * _SQ2OPI / math.sqrt(x)
    return ((wq - p) * math.cos(x) + (p + wq) * math.sin(x)) * _SQ1OPI / math.sqrt(x)


@numba.njit(cache=True)
def j1(x: float) -> float:
    """Bessel function ``J1(x)`` of real ``x`` (odd in ``x``).

    Examples
    --------
    Abramowitz & Stegun table 9.1 (from memory): J1(1) = 0.4400505857.

    >>> round(j1(1.0), 10)
    0.4400505857
    """
    sign = 1.0
    if x < 0.0:
        x = -x
        sign = -1.0
    if x <= 5.0:
        return sign * _j1_small(x)
    p, wq = _pq1(x)
    if x < 10.0:
        xn = x - _THPIO4
        return sign * (p * math.cos(xn) - wq * math.sin(xn)) * _SQ2OPI / math.sqrt(x)
    a = _SQRT1_2 * (wq - p)
    b = _SQRT1_2 * (p + wq)
    return sign * (a * math.cos(x) + b * math.sin(x)) * _SQ2OPI / math.sqrt(x)


@numba.njit(cache=True)
def y1(x: float) -> float:
    """Bessel function ``Y1(x)`` for ``x > 0`` (``-inf`` at 0, NaN below).

    Examples
    --------
    Abramowitz & Stegun table 9.1 (from memory): Y1(1) = -0.7812128213.

    >>> round(y1(1.0), 10)
    -0.7812128213
    """
    if x <= 5.0:
        if x == 0.0:
            return -math.inf
        if not x > 0.0:
            return math.nan
        z = x * x
        w = x * (_poly(z, _Y1_YP) / _poly1(z, _Y1_YQ))
        return w + _TWO_OVER_PI * (_j1_small(x) * math.log(x) - 1.0 / x)
    p, wq = _pq1(x)
    if x < 10.0:
        xn = x - _THPIO4
        return (p * math.sin(xn) + wq * math.cos(xn)) * _SQ2OPI / math.sqrt(x)
    return ((wq - p) * math.sin(x) - (p + wq) * math.cos(x)) * _SQ1OPI / math.sqrt(x)


@numba.njit(cache=True)
def jy01(x: float) -> tuple[float, float, float, float]:
    """``(J0(x), Y0(x), J1(x), Y1(x))`` for ``x > 0``, sharing the common work.

    The same formulas as ``j0, y0, j1, y1``; the results agree with them to
    rounding (the phases ``x - 3 pi/4`` of order one are formed from
    ``x - pi/4`` between 5 and 10).

    Examples
    --------
    Abramowitz & Stegun table 9.1 (from memory).

    >>> [round(v, 10) for v in jy01(1.0)]
    [0.7651976866, 0.0882569642, 0.4400505857, -0.7812128213]
    """
    if x <= 5.0:
        z = x * x
        a0 = _j0_small(x)
        a1 = _j1_small(x)
        lg = math.log(x)
        b0 = _poly(z, _Y0_YP) / _poly1(z, _Y0_YQ) + _TWO_OVER_PI * lg * a0
        b1 = x * (_poly(z, _Y1_YP) / _poly1(z, _Y1_YQ)) + _TWO_OVER_PI * (a1 * lg - 1.0 / x)
        return a0, b0, a1, b1
    p0, wq0 = _pq0(x)
    p1, wq1 = _pq1(x)
    if x < 10.0:
        xn = x - _PIO4
        c = math.cos(xn)
        s = math.sin(xn)
        amp = _SQ2OPI / math.sqrt(x)
        # x - 3 pi/4 = (x - pi/4) - pi/2: cos -> sin, sin -> -cos.
        return (
            (p0 * c - wq0 * s) * amp,
            (p0 * s + wq0 * c) * amp,
            (p1 * s + wq1 * c) * amp,
            (-p1 * c + wq1 * s) * amp,
        )
    c = math.cos(x)
    s = math.sin(x)
    amp = _SQ1OPI / math.sqrt(x)
    return (
        ((p0 + wq0) * c + (p0 - wq0) * s) * amp,
        ((wq0 - p0) * c + (p0 + wq0) * s) * amp,
        ((wq1 - p1) * c + (p1 + wq1) * s) * amp,
        ((wq1 - p1) * s - (p1 + wq1) * c) * amp,
    )


#: Arrays at least this long are done by the parallel loop; below, the
#: serial one (waking the worker threads costs more than it saves).
PARALLEL_MIN = 20_000


@numba.njit(cache=True)
def _j0j1_loop(x: Any, a: Any, b: Any) -> None:
    for i in range(x.size):
        a[i] = j0(x[i])
        b[i] = j1(x[i])


@numba.njit(cache=True, parallel=True)
def _j0j1_loop_parallel(x: Any, a: Any, b: Any) -> None:
    for i in numba.prange(x.size):
        a[i] = j0(x[i])
        b[i] = j1(x[i])


@numba.njit(cache=True)
def _jy01_loop(x: Any, out: Any) -> None:
    for i in range(x.size):
        out[0, i], out[1, i], out[2, i], out[3, i] = jy01(x[i])


def j0j1_array(x: NDArray[Any]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """``J0`` and ``J1`` of a real array (any shape), in parallel from ``PARALLEL_MIN`` values.

    Examples
    --------
    >>> a, b = j0j1_array(np.array([0.0, 1.0]))
    >>> float(a[0]), round(float(b[1]), 10)
    (1.0, 0.4400505857)
    """
    arr = np.asarray(x, dtype=np.float64)
    flat = np.ascontiguousarray(arr).ravel()
    a = np.empty(flat.size)
    b = np.empty(flat.size)
    (_j0j1_loop_parallel if flat.size >= PARALLEL_MIN else _j0j1_loop)(flat, a, b)
    return a.reshape(arr.shape), b.reshape(arr.shape)


def jy01_array(x: NDArray[Any]) -> NDArray[np.float64]:
    """``J0, Y0, J1, Y1`` of a positive real array, stacked: shape ``(4,) + x.shape``."""
    arr = np.asarray(x, dtype=np.float64)
    flat = np.ascontiguousarray(arr).ravel()
    out = np.empty((4, flat.size))
    _jy01_loop(flat, out)
    return out.reshape((4,) + arr.shape)
