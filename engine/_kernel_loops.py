"""Compiled loop behind ``kernels.kernel_matrices`` for real wavenumbers, cached to disk.

Imported on first use by ``engine.kernels`` (importing it imports numba).
Every function here is plain module-level numba code with no
process-specific address (J0, Y0, J1, Y1 come from ``engine.bessel``, the
Hankel amplitudes from the literal polynomials of
``engine._hankel_amplitude``), so ``cache=True`` lets a new process load
the machine code instead of compiling it. numba checks only this file's
time stamp: after editing ``bessel.py`` or ``_hankel_amplitude.py``, touch
this file (or delete its ``__pycache__/_kernel_loops.*.nb*``).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from . import _hankel_amplitude as _amp
from .bessel import jy01
from .kernels import HANKEL_SPLIT

__all__ = ["matrices"]

_SPLIT = HANKEL_SPLIT
_QUARTER_PI = 0.25 * math.pi
_TWO_OVER_PI = 2.0 / math.pi

_m0r = numba.njit(inline="always", fastmath=True, error_model="numpy")(_amp.eval_m0r)
_m0i = numba.njit(inline="always", fastmath=True, error_model="numpy")(_amp.eval_m0i)
_m1r = numba.njit(inline="always", fastmath=True, error_model="numpy")(_amp.eval_m1r)
_m1i = numba.njit(inline="always", fastmath=True, error_model="numpy")(_amp.eval_m1i)


@numba.njit(inline="always")
def _bessels(kr):
    # J0, Y0, J1, Y1 at kr > 0: Cephes (engine.bessel) below HANKEL_SPLIT,
    # the Hankel amplitude fit with one sine and cosine above it.
    if kr < _SPLIT:
        return jy01(kr)
    sv = 2.0 * _SPLIT / kr - 1.0
    m0r, m0i, m1r, m1i = _m0r(sv), _m0i(sv), _m1r(sv), _m1i(sv)
    amp = math.sqrt(_TWO_OVER_PI / kr)
    c = math.cos(kr - _QUARTER_PI)
    sn = math.sin(kr - _QUARTER_PI)
    # H0 = amp M0 e^{-j(kr - pi/4)}, H1 = amp M1 j e^{-j(kr - pi/4)}; H = J - jY.
    return (
        amp * (m0r * c + m0i * sn),
        -amp * (m0i * c - m0r * sn),
        amp * (m1r * sn - m1i * c),
        -amp * (m1r * c + m1i * sn),
    )


@numba.njit(parallel=True, fastmath=False, cache=True)
def matrices(tx, ty, tnx, tny, sx, sy, snx, sny, w, k, want_s, want_d, want_dp, want_dt):
    """Weighted S, D, D', Dt kernel values at targets by sources (zero where they coincide)."""
    m, n = tx.size, sx.size
    s_mat = np.empty((m if want_s else 0, n), dtype=np.complex128)
    d_mat = np.empty((m if want_d else 0, n), dtype=np.complex128)
    dp_mat = np.empty((m if want_dp else 0, n), dtype=np.complex128)
    dt_mat = np.empty((m if want_dt else 0, n), dtype=np.complex128)
    for i in numba.prange(m):
        for j in range(n):
            dx = tx[i] - sx[j]
            dy = ty[i] - sy[j]
            r = math.sqrt(dx * dx + dy * dy)
            if r == 0.0:
                if want_s:
                    s_mat[i, j] = 0.0
                if want_d:
                    d_mat[i, j] = 0.0
                if want_dp:
                    dp_mat[i, j] = 0.0
                if want_dt:
                    dt_mat[i, j] = 0.0
                continue
            kr = k * r
            j0, y0, j1, y1 = _bessels(kr)
            wj = w[j]
            if want_s:
                s_mat[i, j] = complex(-0.25 * y0 * wj, -0.25 * j0 * wj)
            if want_d or want_dp or want_dt:
                # (j k / 4) H1^(2) = (k/4) Y1 + j (k/4) J1
                g = complex(0.25 * k * y1, 0.25 * k * j1) * (wj / r)
                if want_d:
                    d_mat[i, j] = -g * (dx * snx[j] + dy * sny[j])
                if want_dp:
                    dp_mat[i, j] = g * (dx * tnx[i] + dy * tny[i])
                if want_dt:
                    # tangent = normal turned counter-clockwise: (-ny, nx)
                    dt_mat[i, j] = g * (-dx * tny[i] + dy * tnx[i])
    return s_mat, d_mat, dp_mat, dt_mat
