"""Compiled loops behind ``nearfield.scattered_field`` for real wavenumbers, cached to disk.

Imported on first use by ``engine.nearfield`` (importing it imports numba).
J0, Y0, J1, Y1 come from ``engine.bessel`` and the Hankel amplitudes from
the literal polynomials of ``engine._hankel_amplitude``, so nothing here
holds a process-specific address and ``cache=True`` lets a new process
load the machine code instead of compiling it. numba checks only this
file's time stamp: after editing ``bessel.py`` or ``_hankel_amplitude.py``,
touch this file (or delete its ``__pycache__/_nearfield_loops.*.nb*``).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from . import _hankel_amplitude as _amp
from .bessel import jy01
from .kernels import HANKEL_SPLIT

__all__ = ["far_sum", "panel_kernels"]

_SPLIT = HANKEL_SPLIT
# Cody-Waite pieces of pi/2 (the first two have trailing zero bits).
_PIO2_1 = 1.57079632673412561417e00
_PIO2_2 = 6.07710050630396597660e-11
_PIO2_3 = 2.02226624879595063154e-21
_TWO_OVER_PI = 2.0 / math.pi
_FLAGS = {"contract", "arcp", "reassoc", "nsz"}

_m0r = numba.njit(inline="always", fastmath=_FLAGS, error_model="numpy")(_amp.eval_m0r)
_m0i = numba.njit(inline="always", fastmath=_FLAGS, error_model="numpy")(_amp.eval_m0i)
_m1r = numba.njit(inline="always", fastmath=_FLAGS, error_model="numpy")(_amp.eval_m1r)
_m1i = numba.njit(inline="always", fastmath=_FLAGS, error_model="numpy")(_amp.eval_m1i)


@numba.njit(inline="always", fastmath=_FLAGS, error_model="numpy")
def _amplitudes(s):
    return _m0r(s), _m0i(s), _m1r(s), _m1i(s)


@numba.njit(parallel=True, fastmath=_FLAGS, error_model="numpy", cache=True)
def far_sum(tx, ty, sx, sy, snx, sny, a_re, a_im, b_re, b_im, k, chunk):
    """Far sums ``S0, S1`` (pairs with ``k r >= HANKEL_SPLIT``) and the direct sum of the closer pairs."""
    # Returns S1 = sum E1 a and S0 = sum E0 b for pairs with k r >= split
    # (E_nu = exp(-j x) M_nu / sqrt(x), E1 also times r_hat . n_y) and
    # the direct kernel sum for the closer pairs.
    m = tx.size
    n = sx.size
    nrhs = a_re.shape[0]
    s0 = np.zeros((m, nrhs), dtype=np.complex128)
    s1 = np.zeros((m, nrhs), dtype=np.complex128)
    direct = np.zeros((m, nrhs), dtype=np.complex128)
    n_chunks = (m + chunk - 1) // chunk
    for c in numba.prange(n_chunks):
        e0r = np.empty(n)
        e0i = np.empty(n)
        e1r = np.empty(n)
        e1i = np.empty(n)
        for i in range(c * chunk, min(m, (c + 1) * chunk)):
            xi = tx[i]
            yi = ty[i]
            n_close = 0.0
            for j in range(n):
                dx = xi - sx[j]
                dy = yi - sy[j]
                r = math.sqrt(dx * dx + dy * dy)
                x = k * r
                keep = 1.0 if x >= _SPLIT else 0.0
                n_close += 1.0 - keep
                xc = max(x, _SPLIT)
                inv_x = 1.0 / xc
                inv_sqrt = keep * math.sqrt(inv_x)
                s = 2.0 * _SPLIT * inv_x - 1.0
                m0r, m0i, m1r, m1i = _amplitudes(s)
                # exp(-j xc) by reduction to [-pi/4, pi/4].
                q = math.floor(xc * _TWO_OVER_PI + 0.5)
                y = ((xc - q * _PIO2_1) - q * _PIO2_2) - q * _PIO2_3
                y2 = y * y
                sn = y * (1.0 + y2 * (-1.0 / 6 + y2 * (1.0 / 120 + y2 * (-1.0 / 5040 + y2 * (
                    1.0 / 362880 + y2 * (-1.0 / 39916800 + y2 * (1.0 / 6227020800 + y2 * (
                        -1.0 / 1307674368000))))))))
                cs_ = 1.0 + y2 * (-0.5 + y2 * (1.0 / 24 + y2 * (-1.0 / 720 + y2 * (
                    1.0 / 40320 + y2 * (-1.0 / 3628800 + y2 * (1.0 / 479001600 + y2 * (
                        -1.0 / 87178291200 + y2 * (1.0 / 20922789888000))))))))
                # Quadrant arithmetic in floating point (q is a whole number),
                # so the loop stays free of integer conversions.
                h = math.floor(0.5 * q)
                odd = q - 2.0 * h
                hp = math.floor(0.5 * (q + 1.0))
                sg_c = 1.0 - 2.0 * (hp - 2.0 * math.floor(0.5 * hp))
                sg_s = 1.0 - 2.0 * (h - 2.0 * math.floor(0.5 * h))
                cos_x = sg_c * (odd * sn + (1.0 - odd) * cs_)
                sin_x = sg_s * (odd * cs_ + (1.0 - odd) * sn)
                # exp(-j x) = cos - j sin
                pr = cos_x * inv_sqrt
                pi_ = -sin_x * inv_sqrt
                e0r[j] = pr * m0r - pi_ * m0i
                e0i[j] = pr * m0i + pi_ * m0r
                proj = (dx * snx[j] + dy * sny[j]) * (k * inv_x)
                e1r[j] = (pr * m1r - pi_ * m1i) * proj
                e1i[j] = (pr * m1i + pi_ * m1r) * proj
            for rr in range(nrhs):
                acc0r = 0.0
                acc0i = 0.0
                acc1r = 0.0
                acc1i = 0.0
                for j in range(n):
                    acc0r += e0r[j] * b_re[rr, j] - e0i[j] * b_im[rr, j]
                    acc0i += e0r[j] * b_im[rr, j] + e0i[j] * b_re[rr, j]
                    acc1r += e1r[j] * a_re[rr, j] - e1i[j] * a_im[rr, j]
                    acc1i += e1r[j] * a_im[rr, j] + e1i[j] * a_re[rr, j]
                s0[i, rr] = complex(acc0r, acc0i)
                s1[i, rr] = complex(acc1r, acc1i)
            if n_close == 0.0:
                continue
            for j in range(n):
                dx = xi - sx[j]
                dy = yi - sy[j]
                r = math.sqrt(dx * dx + dy * dy)
                x = k * r
                if x >= _SPLIT or r == 0.0:
                    continue
                j0, y0, j1, y1 = jy01(x)
                g = complex(-0.25 * y0, -0.25 * j0)
                proj = (dx * snx[j] + dy * sny[j]) / r
                dg = complex(-0.25 * k * y1, -0.25 * k * j1) * proj
                for rr in range(nrhs):
                    a = complex(a_re[rr, j], a_im[rr, j])
                    b = complex(b_re[rr, j], b_im[rr, j])
                    direct[i, rr] += a * dg - b * g
    return s0, s1, direct

@numba.njit(parallel=False, cache=True)
def panel_kernels(tx, ty, sx, sy, snx, sny, k):
    """Plain S and D kernel values of one panel at the targets."""
    # Plain S and D kernel values (zero where the points coincide), serial:
    # the blocks are small and a parallel region costs more than it saves.
    m = tx.size
    n = sx.size
    s_mat = np.zeros((m, n), dtype=np.complex128)
    d_mat = np.zeros((m, n), dtype=np.complex128)
    for i in range(m):
        for j in range(n):
            dx = tx[i] - sx[j]
            dy = ty[i] - sy[j]
            r = math.sqrt(dx * dx + dy * dy)
            if r == 0.0:
                continue
            x = k * r
            j0, y0, j1, y1 = jy01(x)
            s_mat[i, j] = complex(-0.25 * y0, -0.25 * j0)
            proj = (dx * snx[j] + dy * sny[j]) / r
            d_mat[i, j] = complex(-0.25 * k * y1, -0.25 * k * j1) * proj
    return s_mat, d_mat
