"""The 2D Helmholtz Green's function, its gradients, and their kernel split.

Glossary
--------
Green's function
    ``G(x, y) = -(j/4) H0^(2)(k |x - y|)`` for the time factor
    ``exp(+j w t)``; it solves ``(Delta + k^2) G = -delta`` and radiates
    outward. ``grad_x G = (j k / 4) H1^(2)(k r) r_hat`` with
    ``r_hat = (x - y) / r``.
S, D, D'
    Kernels of the single layer ``G``, the double layer ``dG/dn_y`` and its
    adjoint ``dG/dn_x``; normals point out of the body.
kernel split
    Each kernel is ``A(r) log r + L(r) + R(r)`` with ``A`` and ``R`` smooth
    and ``L`` the Laplace part (zero for ``S``, ``(x - y).n / (2 pi r^2)``
    up to sign for the others). Product weights integrate ``log r`` and the
    Laplace part exactly; plain Gauss weights take the rest.

Bessel functions of real argument run in compiled loops (numba calling
scipy's Cython special functions); complex wavenumbers (lossy media) fall
back to scipy ufuncs.
"""

from __future__ import annotations

import ctypes
import math
from functools import lru_cache
from typing import Any

import numpy as np
import scipy.special as sp
from numpy.typing import NDArray

__all__ = [
    "EULER_GAMMA",
    "bessel_j0j1",
    "bessel_pointers",
    "green",
    "kernel_matrices",
    "log_coefficients",
]

FloatArray = NDArray[np.float64]
ComplexArray = NDArray[np.complex128]

EULER_GAMMA = 0.57721566490153286060651209


@lru_cache(maxsize=1)
def bessel_pointers() -> tuple[Any, Any, Any, Any]:
    """Ctypes handles of scipy's compiled J0, Y0, J1, Y1 (real argument), callable from numba.

    scipy.special.cython_special exports them as PyCapsules whose
    signature is ``double (double, int skip_dispatch)``.
    """
    import scipy.special.cython_special as cs

    get_ptr = ctypes.pythonapi.PyCapsule_GetPointer
    get_ptr.restype = ctypes.c_void_p
    get_ptr.argtypes = [ctypes.py_object, ctypes.c_char_p]
    get_name = ctypes.pythonapi.PyCapsule_GetName
    get_name.restype = ctypes.c_char_p
    get_name.argtypes = [ctypes.py_object]
    proto = ctypes.CFUNCTYPE(ctypes.c_double, ctypes.c_double, ctypes.c_int)

    def fn(name: str) -> Any:
        cap = cs.__pyx_capi__[name]
        return proto(get_ptr(cap, get_name(cap)))

    return fn("j0"), fn("y0"), fn("j1"), fn("y1")


@lru_cache(maxsize=1)
def _compiled() -> Any:
    """Compile the real-argument kernel loops once per process (never cached to disk).

    The addresses of scipy's special functions change between processes,
    so ``cache=True`` would bake in stale pointers.
    """
    import numba

    c_j0, c_y0, c_j1, c_y1 = bessel_pointers()

    @numba.njit(parallel=True, fastmath=False)
    def matrices(tx, ty, tnx, tny, sx, sy, snx, sny, k, want_s, want_d, want_dp, want_dt):
        m, n = tx.size, sx.size
        s_mat = np.zeros((m if want_s else 0, n), dtype=np.complex128)
        d_mat = np.zeros((m if want_d else 0, n), dtype=np.complex128)
        dp_mat = np.zeros((m if want_dp else 0, n), dtype=np.complex128)
        dt_mat = np.zeros((m if want_dt else 0, n), dtype=np.complex128)
        for i in numba.prange(m):
            for j in range(n):
                dx = tx[i] - sx[j]
                dy = ty[i] - sy[j]
                r = math.sqrt(dx * dx + dy * dy)
                if r == 0.0:
                    continue
                kr = k * r
                if want_s:
                    s_mat[i, j] = complex(-0.25 * c_y0(kr, 0), -0.25 * c_j0(kr, 0))
                if want_d or want_dp or want_dt:
                    j1 = c_j1(kr, 0)
                    y1 = c_y1(kr, 0)
                    # (j k / 4) H1^(2) = (k/4) Y1 + j (k/4) J1
                    g = complex(0.25 * k * y1, 0.25 * k * j1) / r
                    if want_d:
                        d_mat[i, j] = -g * (dx * snx[j] + dy * sny[j])
                    if want_dp:
                        dp_mat[i, j] = g * (dx * tnx[i] + dy * tny[i])
                    if want_dt:
                        # tangent = normal turned counter-clockwise: (-ny, nx)
                        dt_mat[i, j] = g * (-dx * tny[i] + dy * tnx[i])
        return s_mat, d_mat, dp_mat, dt_mat

    @numba.njit(parallel=True)
    def j0j1(z):
        a = np.empty(z.size)
        b = np.empty(z.size)
        for i in numba.prange(z.size):
            a[i] = c_j0(z[i], 0)
            b[i] = c_j1(z[i], 0)
        return a, b

    return matrices, j0j1


def bessel_j0j1(z: NDArray[Any]) -> tuple[NDArray[Any], NDArray[Any]]:
    """``J0(z)`` and ``J1(z)`` for real or complex arrays."""
    z = np.asarray(z)
    if np.iscomplexobj(z):
        return sp.jv(0, z), sp.jv(1, z)
    flat = np.ascontiguousarray(z, dtype=float).ravel()
    a, b = _compiled()[1](flat)
    return a.reshape(z.shape), b.reshape(z.shape)


def green(k: complex, r: NDArray[Any]) -> ComplexArray:
    """``G = -(j/4) H0^(2)(k r)``.

    Examples
    --------
    Against DLMF 10.8 / Abramowitz & Stegun table 9.1 (from memory):
    J0(1) = 0.7651976866, Y0(1) = 0.0882569642, so G(1) = -0.0220642 - 0.1912994j.

    >>> g = green(1.0, np.array([1.0]))[0]
    >>> round(g.real, 7), round(g.imag, 7)
    (-0.0220642, -0.1912994)
    """
    return -0.25j * sp.hankel2(0, k * np.asarray(r))


def kernel_matrices(
    targets: FloatArray,
    target_normals: FloatArray,
    sources: FloatArray,
    source_normals: FloatArray,
    k: complex,
    *,
    want_s: bool = True,
    want_d: bool = True,
    want_dp: bool = True,
    want_dt: bool = False,
) -> tuple[ComplexArray, ComplexArray, ComplexArray, ComplexArray]:
    """Point values of the S, D, D' and Dt kernels (zero where the points coincide).

    ``Dt`` is the derivative of ``G`` along the target's tangent,
    ``dG/dt_x`` with ``t_x`` the normal turned counter-clockwise.
    Returns four arrays of shape ``(m, n)`` (an empty ``(0, n)`` one for a
    kernel not asked for).
    """
    tx, ty = (np.ascontiguousarray(targets[:, i]) for i in (0, 1))
    sx, sy = (np.ascontiguousarray(sources[:, i]) for i in (0, 1))
    tnx, tny = (np.ascontiguousarray(target_normals[:, i]) for i in (0, 1))
    snx, sny = (np.ascontiguousarray(source_normals[:, i]) for i in (0, 1))
    if np.isreal(k) and float(np.real(k)) > 0:
        fn = _compiled()[0]
        return fn(
            tx, ty, tnx, tny, sx, sy, snx, sny, float(np.real(k)), want_s, want_d, want_dp, want_dt
        )
    dx = tx[:, None] - sx[None, :]
    dy = ty[:, None] - sy[None, :]
    r = np.hypot(dx, dy)
    zero = r == 0.0
    rs = np.where(zero, 1.0, r)
    m, n = r.shape
    empty = np.zeros((0, n), dtype=complex)
    s_mat = np.where(zero, 0.0, green(k, rs)) if want_s else empty
    d_mat, dp_mat, dt_mat = empty, empty, empty
    if want_d or want_dp or want_dt:
        g = np.where(zero, 0.0, 0.25j * k * sp.hankel2(1, k * rs) / rs)
        if want_d:
            d_mat = -g * (dx * snx[None, :] + dy * sny[None, :])
        if want_dp:
            dp_mat = g * (dx * tnx[:, None] + dy * tny[:, None])
        if want_dt:
            dt_mat = g * (-dx * tny[:, None] + dy * tnx[:, None])
    return s_mat, d_mat, dp_mat, dt_mat


def log_coefficients(
    k: complex, dx: FloatArray, dy: FloatArray, n_src: FloatArray, n_tgt: FloatArray
) -> tuple[NDArray[Any], NDArray[Any], NDArray[Any], NDArray[Any]]:
    """Coefficients of ``log r`` in the S, D, D' and Dt kernels.

    ``dx, dy`` are components of ``x - y``; ``n_src, n_tgt`` are ``(..., 2)``
    normals at the source and the target. From ``Y0 = (2/pi) J0 log(z/2) + ...``
    and ``Y1 = (2/pi) J1 log(z/2) - 2/(pi z) + ...`` (DLMF 10.8.2):
    ``A_S = -J0(kr)/(2 pi)``, ``A_D = -(k/2pi) J1(kr) (r_hat.n_y)``,
    ``A_D' = (k/2pi) J1(kr) (r_hat.n_x)``, ``A_Dt = (k/2pi) J1(kr) (r_hat.t_x)``.
    """
    r = np.hypot(dx, dy)
    j0, j1 = bessel_j0j1(k * r)
    # J1(kr)/r -> k/2 as r -> 0.
    rs = np.where(r == 0.0, 1.0, r)
    j1_over_r = np.where(r == 0.0, 0.5 * k, j1 / rs)
    a_s = -j0 / (2 * np.pi)
    a_d = -(k / (2 * np.pi)) * j1_over_r * (dx * n_src[..., 0] + dy * n_src[..., 1])
    a_dp = (k / (2 * np.pi)) * j1_over_r * (dx * n_tgt[..., 0] + dy * n_tgt[..., 1])
    a_dt = (k / (2 * np.pi)) * j1_over_r * (-dx * n_tgt[..., 1] + dy * n_tgt[..., 0])
    return a_s, a_d, a_dp, a_dt
