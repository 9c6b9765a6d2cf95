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
from numpy.polynomial import chebyshev
from numpy.typing import NDArray

__all__ = [
    "EULER_GAMMA",
    "HANKEL_SPLIT",
    "bessel_j0j1",
    "bessel_pointers",
    "green",
    "hankel_amplitude_functions",
    "kernel_matrices",
    "log_coefficients",
]

FloatArray = NDArray[np.float64]
ComplexArray = NDArray[np.complex128]

EULER_GAMMA = 0.57721566490153286060651209

#: ``k r`` above which the far loop uses the fitted Hankel amplitude.
HANKEL_SPLIT = 6.0
#: Degree of the Chebyshev fit of the amplitudes (error about 3e-14).
_AMPLITUDE_DEGREE = 12


def _amplitude(nu: int, x: NDArray[Any]) -> ComplexArray:
    """``M_nu(x) = H_nu^(2)(x) / (sqrt(2 / (pi x)) exp(-j (x - nu pi / 2 - pi / 4)))``.

    Large arguments use the expansion ``sum_k (-j)^k a_k(nu) / x^k`` with
    ``a_k = prod_{m <= k} (4 nu^2 - (2m - 1)^2) / (k! 8^k)`` (DLMF 10.17.4),
    where 30 terms are far below rounding; smaller ones divide scipy's
    Hankel function by the phase.
    """
    x = np.asarray(x, dtype=float)
    out = np.empty(x.shape, dtype=complex)
    big = x > 300.0
    xs = x[~big]
    out[~big] = sp.hankel2(nu, xs) / (
        np.sqrt(2.0 / (np.pi * xs)) * np.exp(-1j * (xs - nu * np.pi / 2 - np.pi / 4))
    )
    xb = x[big]
    term = np.ones(xb.shape, dtype=complex)
    total = term.copy()
    mu = 4.0 * nu * nu
    for kk in range(1, 30):
        term = term * (mu - (2 * kk - 1) ** 2) / (kk * 8.0 * xb) * (-1j)
        total += term
    out[big] = total
    return out


@lru_cache(maxsize=1)
def _amplitude_coefficients() -> FloatArray:
    """Chebyshev coefficients in ``s = 2 HANKEL_SPLIT / x - 1``: rows Re M0, Im M0, Re M1, Im M1."""
    n = _AMPLITUDE_DEGREE + 1
    s = np.cos(np.pi * (np.arange(n) + 0.5) / n)
    x = HANKEL_SPLIT / (0.5 * (s + 1.0))
    rows = []
    for nu in (0, 1):
        m = _amplitude(nu, x)
        rows.append(chebyshev.chebfit(s, m.real, _AMPLITUDE_DEGREE))
        rows.append(chebyshev.chebfit(s, m.imag, _AMPLITUDE_DEGREE))
    coef = np.ascontiguousarray(np.array(rows))
    coef.setflags(write=False)
    return coef


def _horner_sources() -> str:
    """Python source of the four amplitude polynomials in ``s`` with literal coefficients.

    Literal constants let the compiler unroll and vectorise the far loop.
    """
    lines = []
    for name, row in zip(("m0r", "m0i", "m1r", "m1i"), _amplitude_coefficients(), strict=True):
        mono = chebyshev.cheb2poly(row)
        expr = repr(float(mono[-1]))
        for c in mono[-2::-1]:
            expr = f"({float(c)!r} + s * {expr})"
        lines.append(f"def eval_{name}(s):\n    return {expr}\n")
    return "\n".join(lines)


def hankel_amplitude_functions(flags: Any = True) -> tuple[Any, Any, Any, Any]:
    """Compiled (inlined) ``Re M0, Im M0, Re M1, Im M1`` as functions of ``s = 2 HANKEL_SPLIT / x - 1``.

    ``H_nu^(2)(x) = sqrt(2 / (pi x)) exp(-j (x - nu pi / 2 - pi / 4)) M_nu(x)`` for
    ``x >= HANKEL_SPLIT``: one sine and cosine serve both orders, where scipy's
    J0, Y0, J1, Y1 would compute four.
    """
    import numba

    namespace: dict[str, Any] = {}
    exec(_horner_sources(), namespace)  # trusted source built from literal coefficients
    return tuple(  # type: ignore[return-value]
        numba.njit(inline="always", fastmath=flags, error_model="numpy")(namespace[f"eval_{name}"])
        for name in ("m0r", "m0i", "m1r", "m1i")
    )


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
    m0r_f, m0i_f, m1r_f, m1i_f = hankel_amplitude_functions()
    split = HANKEL_SPLIT
    quarter_pi = 0.25 * math.pi
    two_over_pi = 2.0 / math.pi

    @numba.njit(inline="always")
    def bessels(kr):
        # J0, Y0, J1, Y1 at kr > 0: scipy's Cephes below HANKEL_SPLIT, the
        # Hankel amplitude fit with one sine and cosine above it.
        if kr < split:
            return c_j0(kr, 0), c_y0(kr, 0), c_j1(kr, 0), c_y1(kr, 0)
        sv = 2.0 * split / kr - 1.0
        m0r, m0i, m1r, m1i = m0r_f(sv), m0i_f(sv), m1r_f(sv), m1i_f(sv)
        amp = math.sqrt(two_over_pi / kr)
        c = math.cos(kr - quarter_pi)
        sn = math.sin(kr - quarter_pi)
        # H0 = amp M0 e^{-j(kr - pi/4)}, H1 = amp M1 j e^{-j(kr - pi/4)}; H = J - jY.
        return (
            amp * (m0r * c + m0i * sn),
            -amp * (m0i * c - m0r * sn),
            amp * (m1r * sn - m1i * c),
            -amp * (m1r * c + m1i * sn),
        )

    @numba.njit(parallel=True, fastmath=False)
    def matrices(tx, ty, tnx, tny, sx, sy, snx, sny, w, k, want_s, want_d, want_dp, want_dt):
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
                j0, y0, j1, y1 = bessels(kr)
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
    weights: FloatArray | None = None,
) -> tuple[ComplexArray, ComplexArray, ComplexArray, ComplexArray]:
    """Point values of the S, D, D' and Dt kernels (zero where the points coincide).

    ``Dt`` is the derivative of ``G`` along the target's tangent,
    ``dG/dt_x`` with ``t_x`` the normal turned counter-clockwise.
    Returns four arrays of shape ``(m, n)`` (an empty ``(0, n)`` one for a
    kernel not asked for). With ``weights`` (one per source) each column
    is multiplied by its weight, as a Nystrom matrix needs.
    """
    w = np.ones(sources.shape[0]) if weights is None else np.ascontiguousarray(weights, dtype=float)
    tx, ty = (np.ascontiguousarray(targets[:, i]) for i in (0, 1))
    sx, sy = (np.ascontiguousarray(sources[:, i]) for i in (0, 1))
    tnx, tny = (np.ascontiguousarray(target_normals[:, i]) for i in (0, 1))
    snx, sny = (np.ascontiguousarray(source_normals[:, i]) for i in (0, 1))
    if np.isreal(k) and float(np.real(k)) > 0:
        fn = _compiled()[0]
        return fn(
            tx, ty, tnx, tny, sx, sy, snx, sny, w, float(np.real(k)), want_s, want_d, want_dp, want_dt
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
    if weights is not None:
        for mat in (s_mat, d_mat, dp_mat, dt_mat):
            if mat.shape[0]:
                mat *= w[None, :]
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
