"""Scattered and total fields off the boundary, right up to the surface.

Glossary
--------
Green's representation
    For ``x`` outside every body (normals out of the body),
    ``u_scat(x) = int [u(y) dG/dn_y(x, y) - G(x, y) psi(y)] ds_y`` with
    ``G = -(j/4) H0^(2)(k r)`` and
    ``dG/dn_y = -(j k / 4) H1^(2)(k r) (r_hat . n_y)``, ``r_hat = (x - y) / r``.
far part
    Plain Gauss-Legendre sums over every node. For real ``k`` they run in a
    compiled loop over targets that never forms a target-by-node matrix:
    for ``k r >= HANKEL_SPLIT`` the Hankel functions are written as
    ``sqrt(2 / (pi x)) exp(-j (x - nu pi/2 - pi/4)) M_nu(x)`` with the
    slowly varying amplitude ``M_nu`` a Chebyshev series in ``HANKEL_SPLIT / x``
    (fitted once to scipy's Bessel functions and the large-argument
    expansion, DLMF 10.17.4) and the phase from an inlined sine/cosine; closer
    pairs call the Cephes Bessel functions of ``engine.bessel``. The loops
    live in ``engine._nearfield_loops`` and are cached to disk by numba.
near part
    Targets within ``NEAR_RADIUS`` half-lengths of a panel get the
    kernel-split product weights of ``quadrature.near_weights`` (exact for
    polynomial densities times ``log r`` and the Laplace kernel) instead of
    the plain weights of that panel.
upsampling
    Optionally, targets much closer to a panel than its length use the
    panel's polynomial densities on ``upsample`` child panels whose nodes
    lie on the exact curve; the product rule then sees the smooth factors
    of the kernel (``J0(k r)``, ``J1(k r)``, the panel's speed) resolved on
    a finer scale.
inside
    A point is inside when the winding number of all contours about it is
    1 (holes run clockwise and cancel their outer contour). Far from the
    boundary the polygon through the panel nodes decides; near a panel the
    change of ``arg(tau - z)`` along the panel's interpolant does.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from functools import lru_cache
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .kernels import kernel_matrices
from .mesh import PanelMesh
from .multipole import fmm_at_targets, fmm_precision, fmm_seconds
from .operators import near_corrections, near_pairs
from .quadrature import NEAR_RADIUS, _arg_change, gauss_legendre, interpolation_matrix, near_weights

__all__ = [
    "UPSAMPLE_RATIO",
    "field_at_points",
    "field_on_grid",
    "inside_mask",
    "scattered_field",
    "serial_numba",
]

FloatArray = NDArray[np.float64]
ComplexArray = NDArray[np.complex128]
IncidentFn = Callable[[FloatArray], ComplexArray]

#: A target closer to a panel than this fraction of the panel's length is
#: evaluated on upsampled children when ``upsample > 1``.
UPSAMPLE_RATIO = 0.25
#: Targets per chunk of the fallback (complex ``k``) far sum.
_CHUNK = 2048


@lru_cache(maxsize=1)
def _compiled() -> Any:
    """The compiled far-field and panel loops (``engine._nearfield_loops``, cached to disk by numba).

    Imported on first use, so that importing this module does not import numba.
    """
    from . import _nearfield_loops

    return _nearfield_loops.far_sum, _nearfield_loops.panel_kernels


#: Direct-sum seconds per (node, target) pair (measured: 1000 x 1000 grid, 4096 nodes, 6.7 s);
#: the FMM is used when the direct sum is estimated ``FMM_WORTH`` times dearer.
DIRECT_PAIR_S = 1.6e-9
FMM_WORTH = 2.0


def _far_part(
    mesh: PanelMesh, k: complex, u: ComplexArray, psi: ComplexArray, points: FloatArray
) -> ComplexArray:
    """Plain Gauss-Legendre representation at every target, ``(n_points, n_rhs)``.

    Summed directly, or by the fast multipole method (charges ``-psi w``,
    dipoles ``u w``, to 1e-13) when that is estimated cheaper
    (``FMM_WORTH``): large bodies and large maps.
    """
    w = mesh.weights[:, None]
    a = u * w
    b = psi * w
    m = points.shape[0]
    n = mesh.n_nodes
    kd = abs(k) * float(np.hypot(*np.ptp(np.vstack([points, mesh.nodes]), axis=0)))
    if DIRECT_PAIR_S * n * m > FMM_WORTH * fmm_seconds(n + m, kd):
        src, nrm, tgt = (np.asfortranarray(v.T) for v in (mesh.nodes, mesh.normals, points))
        return np.column_stack([
            fmm_at_targets(src, nrm, k, -b[:, j], a[:, j], fmm_precision(1e-13), tgt) for j in range(a.shape[1])
        ])
    if np.isreal(k) and float(np.real(k)) > 0:
        kr = float(np.real(k))
        far_sum = _compiled()[0]
        tx, ty = (np.ascontiguousarray(points[:, i], dtype=float) for i in (0, 1))
        sx, sy = (np.ascontiguousarray(mesh.nodes[:, i]) for i in (0, 1))
        snx, sny = (np.ascontiguousarray(mesh.normals[:, i]) for i in (0, 1))
        parts = [np.ascontiguousarray(v.T) for v in (a.real, a.imag, b.real, b.imag)]
        chunk = int(max(1, min(256, m // 64 + 1)))
        s0, s1, direct = far_sum(tx, ty, sx, sy, snx, sny, *parts, kr, chunk)
        root = math.sqrt(2.0 / math.pi)
        c0 = 0.25j * root * np.exp(0.25j * np.pi)
        c1 = -0.25j * kr * root * np.exp(0.75j * np.pi)
        return c0 * s0 + c1 * s1 + direct
    out = np.empty((m, u.shape[1]), dtype=complex)
    for lo in range(0, m, _CHUNK):
        hi = min(m, lo + _CHUNK)
        s_mat, d_mat, _, _ = kernel_matrices(
            points[lo:hi], np.zeros((hi - lo, 2)), mesh.nodes, mesh.normals, k,
            want_s=True, want_d=True, want_dp=False, want_dt=False,
        )
        out[lo:hi] = d_mat @ a - s_mat @ b
    return out


def _complex(v: FloatArray) -> ComplexArray:
    return v[..., 0] + 1j * v[..., 1]


def _panel_product(
    k: complex,
    z: ComplexArray,
    tau: ComplexArray,
    tau_t: ComplexArray,
    n_src: ComplexArray,
    omega: FloatArray,
    end_a: complex,
    end_b: complex,
    u: ComplexArray,
    psi: ComplexArray,
) -> ComplexArray:
    """Product-rule minus plain-rule contribution of one panel at targets ``z``."""
    log_w, cauchy = near_weights(tau, tau_t, end_a, end_b, z)
    corr_s, corr_d, _, _ = near_corrections(
        k, z, np.zeros(z.size, dtype=complex), tau, n_src, tau_t, omega, log_w, cauchy,
        want=(True, True, False, False),
    )
    assert corr_s is not None and corr_d is not None
    return corr_d @ u - corr_s @ psi


def _plain_panel(
    k: complex, z: ComplexArray, tau: ComplexArray, n_src: ComplexArray, omega: FloatArray,
    u: ComplexArray, psi: ComplexArray,
) -> ComplexArray:
    """Plain Gauss-Legendre contribution of one panel at targets ``z``."""
    if np.isreal(k) and float(np.real(k)) > 0:
        s_mat, d_mat = _compiled()[1](
            np.ascontiguousarray(z.real), np.ascontiguousarray(z.imag),
            np.ascontiguousarray(tau.real), np.ascontiguousarray(tau.imag),
            np.ascontiguousarray(n_src.real), np.ascontiguousarray(n_src.imag),
            float(np.real(k)),
        )
    else:
        pts = np.column_stack([z.real, z.imag])
        s_mat, d_mat, _, _ = kernel_matrices(
            pts, np.zeros_like(pts), np.column_stack([tau.real, tau.imag]),
            np.column_stack([n_src.real, n_src.imag]), k,
            want_s=True, want_d=True, want_dp=False, want_dt=False,
        )
    return (d_mat * omega[None, :]) @ u - (s_mat * omega[None, :]) @ psi


def _children(mesh: PanelMesh, panel: int, n_child: int) -> list[dict[str, Any]]:
    """Geometry of ``n_child`` equal-parameter pieces of a panel on its exact curve.

    Each piece carries its nodes, derivative with respect to its own
    parameter, normals, weights, ends and the interpolation matrix from the
    parent's nodes.
    """
    p = mesh.p
    x, wgl = gauss_legendre(p)
    seg = mesh.segments[mesh.seg_of_panel[panel]]
    t0, t1 = float(mesh.t0[panel]), float(mesh.t1[panel])
    out = []
    for c in range(n_child):
        lo = -1.0 + 2.0 * c / n_child
        hi = -1.0 + 2.0 * (c + 1) / n_child
        xp = lo + (hi - lo) * 0.5 * (x + 1.0)  # parent parameter of the child's nodes
        t = t0 + (t1 - t0) * 0.5 * (xp + 1.0)
        half = 0.5 * (t1 - t0) * (hi - lo) * 0.5
        pts = seg.points(t)
        d1 = seg.derivative(t) * half
        speed = np.hypot(d1[:, 0], d1[:, 1])
        unit = d1 / speed[:, None]
        normals = np.column_stack([unit[:, 1], -unit[:, 0]])
        ends = seg.points(np.array([t0 + (t1 - t0) * 0.5 * (lo + 1.0),
                                    t0 + (t1 - t0) * 0.5 * (hi + 1.0)]))
        out.append({
            "tau": _complex(pts),
            "tau_t": _complex(d1),
            "n": _complex(normals),
            "omega": wgl * speed,
            "ends": (complex(*ends[0]), complex(*ends[1])),
            "interp": interpolation_matrix(x, xp),
            "center": complex(*(0.5 * (ends[0] + ends[1]))),
            "reach": NEAR_RADIUS * max(0.5 * float(np.hypot(*(ends[1] - ends[0]))),
                               0.5 * float(np.sum(wgl * speed))),
        })
    return out


@contextmanager
def serial_numba() -> Iterator[None]:
    """Run the small compiled calls of the near part on one thread.

    Each panel's correction is a few hundred kernel values; a parallel
    region per panel costs far more than it saves (tens of milliseconds
    each when the cores are busy and the workers spin).
    """
    import numba

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    try:
        yield
    finally:
        numba.set_num_threads(before)


def _near_part(
    mesh: PanelMesh,
    k: complex,
    u: ComplexArray,
    psi: ComplexArray,
    points: FloatArray,
    upsample: int,
) -> ComplexArray:
    """Corrections (product minus plain) for targets near a panel, ``(n_points, n_rhs)``."""
    out = np.zeros((points.shape[0], u.shape[1]), dtype=complex)
    if points.shape[0] == 0:
        return out
    p = mesh.p
    z_all = _complex(points)
    tau_all = mesh.complex_nodes()
    tan_all = _complex(mesh.tangent_t)
    nrm_all = _complex(mesh.normals)
    for panel, tgt in near_pairs(mesh, points, exclude_own=False):
        sl = slice(panel * p, (panel + 1) * p)
        tau, tau_t, n_src, omega = tau_all[sl], tan_all[sl], nrm_all[sl], mesh.weights[sl]
        ends = mesh.ends[panel]
        end_a, end_b = complex(*ends[0]), complex(*ends[1])
        z = z_all[tgt]
        close = np.zeros(tgt.size, dtype=bool)
        if upsample > 1:
            dist = np.min(np.abs(z[:, None] - tau[None, :]), axis=1)
            close = dist < UPSAMPLE_RATIO * mesh.lengths[panel]
        far = ~close
        if np.any(far):
            out[tgt[far]] += _panel_product(
                k, z[far], tau, tau_t, n_src, omega, end_a, end_b, u[sl], psi[sl]
            )
        if np.any(close):
            zc = z[close]
            acc = -_plain_panel(k, zc, tau, n_src, omega, u[sl], psi[sl])
            for child in _children(mesh, panel, upsample):
                uc = child["interp"] @ u[sl]
                pc = child["interp"] @ psi[sl]
                acc += _plain_panel(k, zc, child["tau"], child["n"], child["omega"], uc, pc)
                near = np.abs(zc - child["center"]) < child["reach"]
                if np.any(near):
                    acc[near] += _panel_product(  # type: ignore[call-arg]
                        k, zc[near], child["tau"], child["tau_t"], child["n"], child["omega"],
                        *child["ends"], uc, pc,
                    )
            out[tgt[close]] += acc
    return out


def scattered_field(
    mesh: PanelMesh,
    k: complex,
    u: ComplexArray,
    psi: ComplexArray,
    points: ArrayLike,
    *,
    upsample: int = 2,
) -> ComplexArray:
    """Scattered field at points outside every body from the boundary traces.

    Parameters
    ----------
    mesh
        The panel mesh the traces live on.
    k
        Wavenumber of the surrounding medium (complex for a lossy medium).
    u, psi
        Total field and its normal derivative (normal out of the body) at
        the nodes, shape ``(n_nodes, n_rhs)`` or ``(n_nodes,)``.
    points
        Targets, shape ``(n_points, 2)``; they must lie outside every body
        (inside, the representation gives ``-u_inc`` rather than zero).
    upsample
        Number of child panels for targets closer to a panel than
        ``UPSAMPLE_RATIO`` of its length; 1 turns upsampling off.

    Returns
    -------
    ndarray, shape (n_points, n_rhs), complex
        ``u_scat = int (u dG/dn_y - G psi) ds``.

    Notes
    -----
    No target-by-node matrix is formed for real ``k``; for complex ``k``
    the plain sum runs in chunks of ``_CHUNK`` targets.
    """
    pts = np.ascontiguousarray(np.asarray(points, dtype=float).reshape(-1, 2))
    u2 = np.asarray(u, dtype=complex)
    psi2 = np.asarray(psi, dtype=complex)
    if u2.ndim == 1:
        u2, psi2 = u2[:, None], psi2[:, None]
    if u2.shape != psi2.shape or u2.shape[0] != mesh.n_nodes:
        raise ValueError(
            f"u and psi must both have {mesh.n_nodes} rows; got {u2.shape} and {psi2.shape}"
        )
    if int(upsample) < 1:
        raise ValueError(f"upsample must be a positive integer, got {upsample!r}")
    if pts.shape[0] == 0:
        return np.zeros((0, u2.shape[1]), dtype=complex)
    out = _far_part(mesh, k, u2, psi2, pts)
    with serial_numba():
        out += _near_part(mesh, k, u2, psi2, pts, int(upsample))
    return out


def _contour_polygons(mesh: PanelMesh) -> list[tuple[FloatArray, float]]:
    """Polygon through every panel's start, nodes (and end) per contour, with its orientation."""
    out = []
    p = mesh.p
    nodes = mesh.nodes.reshape(mesh.n_panels, p, 2)
    for c in np.unique(mesh.contour_of_panel):
        idx = np.flatnonzero(mesh.contour_of_panel == c)
        verts = np.concatenate([np.vstack([mesh.ends[i, :1], nodes[i]]) for i in idx])
        x, y = verts[:, 0], verts[:, 1]
        area = 0.5 * float(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y))
        out.append((verts, 1.0 if area > 0 else -1.0))
    return out


def inside_mask(mesh: PanelMesh, points: ArrayLike) -> NDArray[np.bool_]:
    """Mark the points inside any body (holes count as outside).

    Parameters
    ----------
    mesh
        Panel mesh of all contours (outer contours counter-clockwise, holes
        clockwise).
    points
        Shape ``(n_points, 2)``.

    Returns
    -------
    ndarray of bool, shape (n_points,)
        Winding number of the boundary about each point rounded, at least 1.

    Notes
    -----
    Points beyond ``NEAR_RADIUS`` half-lengths of every panel are decided
    by the polygon through the panel ends and nodes (the curve cannot pass
    on the other side of such a point); the others sum the change of
    ``arg(tau - z)`` over every panel, along the panel's interpolant for
    the panels they are near and along the chord for the rest.
    """
    import shapely

    pts = np.asarray(points, dtype=float).reshape(-1, 2)
    wind = np.zeros(pts.shape[0])
    for verts, sign in _contour_polygons(mesh):
        poly = shapely.Polygon(verts)
        shapely.prepare(poly)
        wind += sign * shapely.contains_xy(poly, pts[:, 0], pts[:, 1])
    near_any = np.zeros(pts.shape[0], dtype=bool)
    pairs = list(near_pairs(mesh, pts, exclude_own=False))
    for _, tgt in pairs:
        near_any[tgt] = True
    idx = np.flatnonzero(near_any)
    if idx.size:
        z = _complex(pts[idx])
        za = _complex(mesh.ends[:, 0])
        zb = _complex(mesh.ends[:, 1])
        pos = np.full(pts.shape[0], -1, dtype=np.int64)
        pos[idx] = np.arange(idx.size)
        arg = np.zeros((idx.size, mesh.n_panels))
        for lo in range(0, idx.size, 4096):
            sl = slice(lo, min(idx.size, lo + 4096))
            # A point exactly on a panel end is on the boundary; its angle is
            # undefined and the point is reported as inside (masked).
            with np.errstate(divide="ignore", invalid="ignore"):
                arg[sl] = np.angle((zb[None, :] - z[sl, None]) / (za[None, :] - z[sl, None]))
        tau_all = mesh.complex_nodes()
        p = mesh.p
        for panel, tgt in pairs:
            rows = pos[tgt]
            tau = tau_all[panel * p : (panel + 1) * p]
            center = 0.5 * (za[panel] + zb[panel])
            half = 0.5 * (zb[panel] - za[panel])
            # a point exactly on a panel end or node has no angle there (NaN below)
            with np.errstate(divide="ignore", invalid="ignore"):
                arg[rows, panel] = _arg_change((tau - center) / half, (z[rows] - center) / half)
        wind[idx] = arg.sum(axis=1) / (2 * np.pi)
    # Points on the boundary itself have an undefined (NaN) or half-integer
    # winding number; they are masked like inside points.
    on_boundary = np.isnan(wind) | (np.abs(wind - np.rint(wind)) > 0.25)
    return on_boundary | (np.rint(np.nan_to_num(wind)) >= 1)


def _fields(
    mesh: PanelMesh,
    k: complex,
    u: ComplexArray,
    psi: ComplexArray,
    incident_fn: IncidentFn,
    pts: FloatArray,
    upsample: int,
) -> dict[str, NDArray[Any]]:
    inside = inside_mask(mesh, pts)
    outside = np.flatnonzero(~inside)
    n_rhs = 1 if np.ndim(u) == 1 else int(np.shape(u)[1])
    scat = np.full((pts.shape[0], n_rhs), np.nan + 1j * np.nan)
    inc = scat.copy()
    if outside.size:
        scat[outside] = scattered_field(mesh, k, u, psi, pts[outside], upsample=upsample)
        vals = np.asarray(incident_fn(pts[outside]), dtype=complex)
        inc[outside] = vals.reshape(outside.size, n_rhs)
    return {"total": scat + inc, "scattered": scat, "incident": inc, "inside": inside}


def field_on_grid(
    mesh: PanelMesh,
    k: complex,
    u: ComplexArray,
    psi: ComplexArray,
    incident_fn: IncidentFn,
    x: ArrayLike,
    y: ArrayLike,
    *,
    upsample: int = 2,
) -> dict[str, NDArray[Any]]:
    """Total, scattered and incident fields on the grid ``x`` by ``y``.

    Parameters
    ----------
    mesh, k, u, psi
        As for ``scattered_field``.
    incident_fn
        ``incident_fn(points) -> (n_points, n_rhs)`` complex incident field.
    x, y
        Grid coordinates, shapes ``(nx,)`` and ``(ny,)``.
    upsample
        As for ``scattered_field``.

    Returns
    -------
    dict
        ``'total'``, ``'scattered'``, ``'incident'``: complex ``(ny, nx, n_rhs)``
        with NaN inside bodies; ``'inside'``: bool ``(ny, nx)``.
    """
    xs = np.asarray(x, dtype=float).ravel()
    ys = np.asarray(y, dtype=float).ravel()
    gx, gy = np.meshgrid(xs, ys)
    pts = np.column_stack([gx.ravel(), gy.ravel()])
    res = _fields(mesh, k, u, psi, incident_fn, pts, upsample)
    shape = (ys.size, xs.size)
    return {
        key: val.reshape(shape + val.shape[1:]) for key, val in res.items()
    }


def field_at_points(
    mesh: PanelMesh,
    k: complex,
    u: ComplexArray,
    psi: ComplexArray,
    incident_fn: IncidentFn,
    points: ArrayLike,
    *,
    upsample: int = 2,
) -> dict[str, NDArray[Any]]:
    """Total, scattered and incident fields at probe points.

    Parameters
    ----------
    mesh, k, u, psi, incident_fn, upsample
        As for ``field_on_grid``.
    points
        Shape ``(n_points, 2)``.

    Returns
    -------
    dict
        ``'total'``, ``'scattered'``, ``'incident'``: complex ``(n_points, n_rhs)``
        with NaN inside bodies; ``'inside'``: bool ``(n_points,)``.
    """
    pts = np.asarray(points, dtype=float).reshape(-1, 2)
    return _fields(mesh, k, u, psi, incident_fn, pts, upsample)
