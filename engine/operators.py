"""Nystrom matrices of the boundary operators S, D, D' and T.

Glossary
--------
S
    Single layer, ``(S f)(x) = int G(x, y) f(y) ds_y``.
D
    Double layer, kernel ``dG/dn_y``; its principal value on the boundary.
D'
    Adjoint double layer, kernel ``dG/dn_x``.
T
    Hypersingular operator ``dD/dn_x``, assembled through Maue's identity
    ``T f = d/ds_x S (df/ds) + k^2 n_x . S (n f)`` so that only weakly
    singular integrals are ever computed.

Jump relations with normals out of the body (Colton & Kress, Integral
Equation Methods in Scattering Theory, 1983, Thm 2.13/2.19, conjugated for
``exp(+j w t)``): the exterior limit of the double-layer potential is
``(D + 1/2) f`` and of the normal derivative of the single-layer
potential ``(D' - 1/2) f``.

Every entry is a Nystrom weight: ``(A f)_i = sum_j A[i, j] f_j``. Entries
whose source panel is the target's own panel, or whose target is closer
than ``NEAR_RADIUS`` half-lengths to the source panel, use kernel-split
product weights (see ``quadrature``); all others are plain Gauss-Legendre.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .kernels import EULER_GAMMA, kernel_matrices, log_coefficients
from .mesh import PanelMesh
from .quadrature import (
    NEAR_RADIUS,
    gauss_legendre,
    interpolation_matrix,
    near_weights,
    self_cauchy_weights,
    self_log_weights,
)

__all__ = ["Operators", "assemble_operators", "near_corrections", "near_pairs", "self_panel_blocks"]

ComplexArray = NDArray[np.complex128]


@dataclass
class Operators:
    """Dense operator matrices on one mesh at one wavenumber (None if not asked for)."""

    k: complex
    S: ComplexArray | None
    D: ComplexArray | None
    Dp: ComplexArray | None
    T: ComplexArray | None


def near_pairs(mesh: PanelMesh, targets: NDArray[np.float64], *, exclude_own: bool):
    """For each panel, the targets within ``NEAR_RADIUS`` half-lengths of its centre.

    Yields ``(panel, target_indices)``; with ``exclude_own`` the panel's own
    nodes are left out (they use the self rule).
    """
    tz = targets[:, 0] + 1j * targets[:, 1]
    centers = 0.5 * (mesh.ends[:, 0] + mesh.ends[:, 1])
    cz = centers[:, 0] + 1j * centers[:, 1]
    half = 0.5 * np.abs(
        (mesh.ends[:, 1, 0] - mesh.ends[:, 0, 0]) + 1j * (mesh.ends[:, 1, 1] - mesh.ends[:, 0, 1])
    )
    # Use the larger of the chord and arc half-lengths: curved panels reach farther.
    reach = NEAR_RADIUS * np.maximum(half, 0.5 * mesh.lengths)
    from scipy.spatial import cKDTree

    tree = cKDTree(np.column_stack([tz.real, tz.imag]))
    p = mesh.p
    for panel in range(mesh.n_panels):
        idx = np.array(tree.query_ball_point([cz[panel].real, cz[panel].imag], reach[panel]), dtype=np.int64)
        if exclude_own and idx.size:
            idx = idx[(idx < panel * p) | (idx >= (panel + 1) * p)]
        if idx.size:
            yield panel, np.sort(idx)


def assemble_operators(
    mesh: PanelMesh,
    k: complex,
    *,
    need_s: bool = True,
    need_d: bool = True,
    need_dp: bool = True,
    need_t: bool = True,
) -> Operators:
    """Assemble the requested operators on ``mesh`` at wavenumber ``k``.

    ``T`` is built from ``S`` and the tangential-derivative operator ``Dt``
    (kernel ``dG/dt_x``, a principal-value integral), so ``S`` is returned
    with it.
    """
    need_s = need_s or need_t
    nodes, normals, w = mesh.nodes, mesh.normals, mesh.weights
    mats = kernel_matrices(
        nodes, normals, nodes, normals, k,
        want_s=need_s, want_d=need_d, want_dp=need_dp, want_dt=need_t, weights=w,
    )
    _self_panel_rule(mesh, k, mats)
    _near_panel_rule(mesh, k, mats)
    s_mat, d_mat, dp_mat, dt_mat = mats
    t_mat = _maue(mesh, k, s_mat, dt_mat) if need_t else None
    return Operators(
        k,
        s_mat if need_s else None,
        d_mat if need_d else None,
        dp_mat if need_dp else None,
        t_mat,
    )


def _self_panel_rule(mesh: PanelMesh, k: complex, mats: tuple[ComplexArray, ...]) -> None:
    """Overwrite the diagonal blocks of the dense matrices with the self rule (``self_panel_blocks``)."""
    p, npan = mesh.p, mesh.n_panels
    stacks = tuple(
        np.stack([m[i * p : (i + 1) * p, i * p : (i + 1) * p] for i in range(npan)])
        if m.shape[0] else np.zeros((0, p, p), dtype=complex)
        for m in mats
    )
    self_panel_blocks(mesh, k, stacks)
    for mat, stack in zip(mats, stacks):
        for i in range(npan if mat.shape[0] else 0):
            mat[i * p : (i + 1) * p, i * p : (i + 1) * p] = stack[i]


def self_panel_blocks(mesh: PanelMesh, k: complex, blocks: tuple[ComplexArray, ...]) -> None:
    """Turn plain own-panel blocks ``(n_panels, p, p)`` of S, D, D', Dt into the self rule, in place.

    On its own panel a kernel is ``A log|t - t_i| + c / (t - t_i) + B`` in
    the panel parameter, with ``B`` smooth; the log and (for Dt) the
    principal-value parts get product weights, ``B`` Gauss weights, and
    ``B`` at the target itself is its analytic limit. A block given with
    zero length is skipped.
    """
    p, npan = mesh.p, mesh.n_panels
    x, _ = gauss_legendre(p)
    ws = self_log_weights(p)
    wc = self_cauchy_weights(p)
    diff_t = x[None, :] - x[:, None]  # t_j - t_i
    np.fill_diagonal(diff_t, 1.0)
    log_dt = np.log(np.abs(diff_t))
    inv_dt = 1.0 / diff_t
    np.fill_diagonal(log_dt, 0.0)
    np.fill_diagonal(inv_dt, 0.0)
    pts = mesh.nodes.reshape(npan, p, 2)
    nrm = mesh.normals.reshape(npan, p, 2)
    speed = mesh.speed.reshape(npan, p)
    kappa = mesh.curvature.reshape(npan, p)
    omega = mesh.weights.reshape(npan, p)
    tan = mesh.tangent_t / mesh.speed[:, None]
    accel_along = np.einsum("ij,ij->i", mesh.accel_t, tan).reshape(npan, p)
    dx = pts[:, :, None, 0] - pts[:, None, :, 0]
    dy = pts[:, :, None, 1] - pts[:, None, :, 1]
    n_src = np.broadcast_to(nrm[:, None, :, :], (npan, p, p, 2))
    n_tgt = np.broadcast_to(nrm[:, :, None, :], (npan, p, p, 2))
    coefs = log_coefficients(k, dx, dy, n_src, n_tgt)
    eye = np.eye(p, dtype=bool)
    # Smooth remainders at r -> 0. S: G + J0 log(r) / (2 pi) -> -j/4 - (log(k/2) + gamma)/(2 pi)
    # (DLMF 10.8.2); D, D': the Laplace part tends to -kappa / (4 pi); Dt: with
    # y(t) = x + y' d + y'' d^2 / 2, (x - y).t / r^2 = -1/(s d) + (y''.t) / (2 s^2).
    r_s = -0.25j - (np.log(k / 2.0) + EULER_GAMMA) / (2 * np.pi)
    r_d = -kappa / (4 * np.pi)
    diag_rest = (
        r_s - np.log(speed) / (2 * np.pi),
        r_d,
        r_d,
        -accel_along / (4 * np.pi * speed**2),
    )
    pv_coef = (None, None, None, 1.0 / (2 * np.pi * speed))
    for stack, coef, rest, cpv in zip(blocks, coefs, diag_rest, pv_coef):
        if not stack.shape[0]:
            continue
        stack -= coef * log_dt[None] * omega[:, None, :]
        if cpv is not None:
            stack -= cpv[:, :, None] * inv_dt[None] * omega[:, None, :]
        stack[:, eye] = rest * omega
        stack += coef * ws[None] * speed[:, None, :]
        if cpv is not None:
            stack += cpv[:, :, None] * wc[None] * speed[:, None, :]


def _near_panel_rule(mesh: PanelMesh, k: complex, mats: tuple[ComplexArray, ...]) -> None:
    """Replace plain weights by product weights for targets close to a panel."""
    p = mesh.p
    zt = mesh.complex_nodes()
    tan = mesh.tangent_t[:, 0] + 1j * mesh.tangent_t[:, 1]
    nrm = mesh.normals[:, 0] + 1j * mesh.normals[:, 1]
    for panel, tgt in near_pairs(mesh, mesh.nodes, exclude_own=True):
        sl = slice(panel * p, (panel + 1) * p)
        ends = mesh.ends[panel]
        log_w, cauchy = near_weights(zt[sl], tan[sl], complex(*ends[0]), complex(*ends[1]), zt[tgt])
        corrections = near_corrections(
            k, zt[tgt], nrm[tgt], zt[sl], nrm[sl], tan[sl], mesh.weights[sl], log_w, cauchy,
            want=tuple(m.shape[0] > 0 for m in mats),
        )
        for mat, corr in zip(mats, corrections):
            if corr is not None:
                mat[tgt, sl] += corr


def near_corrections(
    k: complex,
    z: NDArray[np.complex128],
    n_tgt: NDArray[np.complex128],
    tau: NDArray[np.complex128],
    n_src: NDArray[np.complex128],
    tau_t: NDArray[np.complex128],
    omega: NDArray[np.float64],
    log_w: NDArray[np.float64],
    cauchy: NDArray[np.complex128],
    want: tuple[bool, ...] = (True, True, True, True),
) -> list[NDArray[Any] | None]:
    """Corrections (product minus plain weights) for S, D, D' and Dt, shape ``(m, p)``.

    ``n_tgt`` may hold zeros for targets off the boundary (field points);
    the D' and Dt corrections are then meaningless and should not be asked for.
    """
    diff = z[:, None] - tau[None, :]
    dx, dy = diff.real, diff.imag
    r = np.abs(diff)
    n_s = np.stack([n_src.real, n_src.imag], axis=-1)[None, :, :]
    n_t = np.stack([n_tgt.real, n_tgt.imag], axis=-1)[:, None, :]
    a_s, a_d, a_dp, a_dt = log_coefficients(k, dx, dy, n_s, n_t)
    log_fix = log_w - np.log(r) * omega[None, :]
    unit = (np.abs(tau_t) / tau_t)[None, :]
    out: list[NDArray[Any] | None] = [None, None, None, None]

    def laplace_fix(direction: NDArray[np.complex128]) -> NDArray[np.float64]:
        # int f Re[c / (z - tau)] ds with product weights, minus the plain rule.
        prod = -cauchy * direction * unit
        plain = (direction / diff) * omega[None, :]
        return (prod.real - plain.real) / (2 * np.pi)

    if want[0]:
        out[0] = a_s * log_fix
    if want[1]:
        out[1] = a_d * log_fix + laplace_fix(np.broadcast_to(n_src[None, :], diff.shape))
    if want[2]:
        out[2] = a_dp * log_fix - laplace_fix(np.broadcast_to(n_tgt[:, None], diff.shape))
    if want[3]:
        t_tgt = 1j * n_tgt  # tangent = normal turned counter-clockwise
        out[3] = a_dt * log_fix - laplace_fix(np.broadcast_to(t_tgt[:, None], diff.shape))
    return out


def _maue(mesh: PanelMesh, k: complex, s_mat: ComplexArray, dt_mat: ComplexArray) -> ComplexArray:
    """Hypersingular operator by Maue's identity: ``T = Dt d/ds + k^2 n_x . S n``.

    ``d/ds_x S (f')`` is written as ``Dt f'`` (the derivative moved onto the
    kernel), so only the density is differentiated, panel by panel; an
    outer numerical derivative would make the discrete system unstable.
    The density is a polynomial on each panel, so its true derivative also
    holds point masses ``[u]_J delta(s - s_J)`` at the panel joints; their
    contribution ``dG/dt_x(x, y_J) [u]_J`` keeps the discrete T from
    ignoring jumps between panels (which it otherwise would, ruining corners).
    """
    npan, p = mesh.n_panels, mesh.p
    ds = mesh.arclength_derivative()
    x, _ = gauss_legendre(p)
    at_start = interpolation_matrix(x, np.array([-1.0]))[0]
    at_end = interpolation_matrix(x, np.array([1.0]))[0]
    prev, _ = mesh.neighbours()
    joints = mesh.ends[:, 0, :]
    _, _, _, g = kernel_matrices(
        mesh.nodes, mesh.normals, joints, np.zeros_like(joints), k,
        want_s=False, want_d=False, want_dp=False, want_dt=True,
    )  # (n, npan): dG/dt_x at the start joint of every panel
    # T overwrites Dt block by block (each block of T needs only the same block
    # of Dt), so no second N x N array is allocated.
    t_mat = dt_mat
    for a in range(npan):
        blk = slice(a * p, (a + 1) * p)
        t_mat[:, blk] = dt_mat[:, blk] @ ds[a]
    for a in range(npan):
        t_mat[:, a * p : (a + 1) * p] += g[:, a : a + 1] * at_start[None, :]
        if mesh.open_chain and a == 0:
            continue  # an open chain has no panel before its first one
        b = int(prev[a])
        t_mat[:, b * p : (b + 1) * p] -= g[:, a : a + 1] * at_end[None, :]
    if mesh.open_chain:
        _end_joint(mesh, k, t_mat, at_end)
    add_normal_term(t_mat, s_mat, mesh.normals, complex(k * k))
    return t_mat


def _end_joint(mesh: PanelMesh, k: complex, t_mat: ComplexArray, at_end: NDArray[np.float64]) -> None:
    """The joint term at the far end of an open chain of panels (a local corner mesh).

    Each open end keeps the half of its joint term that involves the
    chain's own density (at the start: the first panel's start value, added
    in the joint loop; here: the last panel's end value); the other half
    involves the density beyond the chain, which in the corner recursion
    belongs to the coarser level.
    """
    p = mesh.p
    last = mesh.n_panels - 1
    end_joint = mesh.ends[last : last + 1, 1, :]
    _, _, _, g_end = kernel_matrices(
        mesh.nodes, mesh.normals, end_joint, np.zeros_like(end_joint), k,
        want_s=False, want_d=False, want_dp=False, want_dt=True,
    )
    t_mat[:, last * p : (last + 1) * p] -= g_end * at_end[None, :]


def add_normal_term(t_mat: ComplexArray, s_mat: ComplexArray, normals: NDArray[np.float64], k2: complex) -> None:
    """``T += k^2 (n_x . n_y) S`` in place (compiled, no N x N temporaries)."""
    _normal_term()(t_mat, s_mat, np.ascontiguousarray(normals[:, 0]), np.ascontiguousarray(normals[:, 1]), k2)


@lru_cache(maxsize=1)
def _normal_term():
    import numba

    @numba.njit(parallel=True, cache=True)
    def run(t_mat, s_mat, nx, ny, k2):
        n = nx.size
        for i in numba.prange(n):
            for j in range(n):
                t_mat[i, j] += k2 * (nx[i] * nx[j] + ny[i] * ny[j]) * s_mat[i, j]

    return run
