"""Resonance-free boundary integral equations for impenetrable bodies.

Glossary
--------
u, psi
    The total field on the boundary and its normal derivative (normal out
    of the body, into the surrounding medium).
Green's representation
    For x outside every body, ``u(x) = u_inc(x) + int (u dG/dn_y - G psi) ds_y``.
    Its boundary limits (jump relations in ``operators``) give
    ``(E1)  u/2 - D u + S psi = u_inc`` and
    ``(E2)  psi/2 + D' psi - T u = du_inc/dn``.
boundary conditions
    ``dirichlet``: u = 0 (TM PEC, sound-soft); unknown psi.
    ``neumann``: psi = 0 (TE PEC, sound-hard); unknown u.
    ``robin``: psi = lam u (impedance surfaces); unknown u.
combined equations
    Dirichlet rows use ``E2 + beta E1`` (the direct combined-field
    equation), the others ``E1 + alpha E2`` (Burton & Miller, Proc. R.
    Soc. A 323, 1971). A non-zero solution of the homogeneous system would
    give an interior field with ``dw/dn = -beta w`` (or ``w = -alpha dw/dn``)
    on the boundary; Green's first identity makes its imaginary part force
    ``w = 0`` whenever the coupling is not real, so no frequency is
    resonant. The circle's interior eigenfrequencies (zeros of J0 and J1')
    are checked in the tests.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.typing import NDArray

from .operators import Operators

__all__ = [
    "DIRICHLET",
    "NEUMANN",
    "ROBIN",
    "SurfaceConditions",
    "coupling_constants",
    "needed_operators",
    "right_hand_sides",
    "surface_traces",
    "system_matrix",
]

ComplexArray = NDArray[np.complex128]

DIRICHLET, NEUMANN, ROBIN = 0, 1, 2


@dataclass(frozen=True)
class SurfaceConditions:
    """Boundary condition of every node: a kind code and the Robin factor ``lam``.

    ``psi = lam * u`` on Robin nodes; ``lam`` is ignored elsewhere.
    ``panel_length`` (the length of each node's panel) lets the rows of
    the Burton-Miller equations be balanced on the tiny panels next to
    corners, where ``alpha T`` grows like 1 / length.
    """

    kind: NDArray[np.int64]
    lam: ComplexArray
    panel_length: NDArray[np.float64] | None = None


def coupling_constants(k: complex) -> tuple[complex, complex]:
    """``(alpha, beta)`` for the combined equations; both have non-zero imaginary parts.

    The scaling with ``k`` balances the two equations: ``psi ~ k u``.
    """
    kr = abs(k)
    return (-1j / kr, -1j * kr)


def _columns(cond: SurfaceConditions, k: complex) -> tuple[ComplexArray, ComplexArray]:
    """How each unknown maps to (u, psi) at its node.

    Dirichlet unknowns are ``psi / |k|`` so that every unknown has the
    size of the field itself; this balances the columns of mixed scenes.
    """
    is_d = cond.kind == DIRICHLET
    p_u = np.where(is_d, 0.0, 1.0).astype(complex)
    p_psi = np.where(is_d, abs(k), np.where(cond.kind == ROBIN, cond.lam, 0.0)).astype(complex)
    return p_u, p_psi


def _rows(cond: SurfaceConditions, k: complex) -> tuple[ComplexArray, ComplexArray]:
    """Row weights (pure scalings of each equation, so the solution is unchanged).

    Dirichlet rows are divided by ``|k|``. Burton-Miller rows on a panel of
    length ``h`` are multiplied by ``h / (h + 1/|k|)``: the hypersingular
    part scales like ``1/h`` there, and this keeps the system's condition
    number near its smooth-body value however deep the corner refinement
    (measured on the square: 3.6e12 -> 7e4 at 32 levels).
    """
    alpha, beta = coupling_constants(k)
    is_d = cond.kind == DIRICHLET
    balance = 1.0 if cond.panel_length is None else cond.panel_length / (cond.panel_length + 1.0 / abs(k))
    c1 = np.where(is_d, beta / abs(k), balance).astype(complex)
    c2 = np.where(is_d, 1.0 / abs(k), alpha * balance).astype(complex)
    return c1, c2


def system_matrix(ops: Operators, cond: SurfaceConditions) -> ComplexArray:
    """The combined system ``A x = b`` for the unknown of every node.

    ``A = c1 [(I/2 - D) P_u + S P_psi] + c2 [(I/2 + D') P_psi - T P_u]`` with
    the row weights ``c1, c2`` and column maps ``P_u, P_psi``. It is built in
    one compiled pass, in place of one of the operator matrices (which the
    caller must not use afterwards).
    """
    p_u, p_psi = _columns(cond, ops.k)
    c1, c2 = _rows(cond, ops.k)
    n = p_u.size
    mats = [ops.S, ops.D, ops.Dp, ops.T]
    out = next(m for m in mats if m is not None)
    empty = np.zeros((0, 0), dtype=complex)
    _combine()(
        out,
        *(m if m is not None else empty for m in mats),
        c1, c2, p_u, p_psi,
    )
    out[np.diag_indices(n)] += 0.5 * (c1 * p_u + c2 * p_psi)
    return out


@lru_cache(maxsize=1)
def _combine():
    import numba

    @numba.njit(parallel=True)
    def run(out, s_mat, d_mat, dp_mat, t_mat, c1, c2, p_u, p_psi):
        n = out.shape[0]
        has_s, has_d, has_dp, has_t = s_mat.size > 0, d_mat.size > 0, dp_mat.size > 0, t_mat.size > 0
        for i in numba.prange(n):
            for j in range(n):
                acc1 = 0j
                acc2 = 0j
                if has_s:
                    acc1 += s_mat[i, j] * p_psi[j]
                if has_d:
                    acc1 -= d_mat[i, j] * p_u[j]
                if has_dp:
                    acc2 += dp_mat[i, j] * p_psi[j]
                if has_t:
                    acc2 -= t_mat[i, j] * p_u[j]
                out[i, j] = c1[i] * acc1 + c2[i] * acc2

    return run


def right_hand_sides(
    cond: SurfaceConditions, k: complex, u_inc: ComplexArray, dn_inc: ComplexArray
) -> ComplexArray:
    """Right-hand sides (one column per incident wave) matching ``system_matrix``."""
    c1, c2 = _rows(cond, k)
    return c1[:, None] * u_inc + c2[:, None] * dn_inc


def surface_traces(
    cond: SurfaceConditions, k: complex, x: ComplexArray
) -> tuple[ComplexArray, ComplexArray]:
    """Total field ``u`` and normal derivative ``psi`` on the boundary from the unknowns."""
    p_u, p_psi = _columns(cond, k)
    return p_u[:, None] * x, p_psi[:, None] * x


def needed_operators(cond: SurfaceConditions) -> dict[str, bool]:
    """Which operators the system needs (keyword arguments of ``assemble_operators``)."""
    p_u, p_psi = _columns(cond, 1.0)
    has_u = bool(np.any(p_u != 0))
    has_psi = bool(np.any(p_psi != 0))
    # S is always needed: for psi unknowns directly, for u unknowns inside T.
    return {"need_s": True, "need_d": has_u, "need_dp": has_psi, "need_t": has_u}
