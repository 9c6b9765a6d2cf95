"""The fast solver: GMRES on the boundary equations, far interactions by a fast multipole method.

Glossary
--------
plain rule
    Gauss-Legendre weight times kernel value: what the fast multipole
    method (FMM) sums for every pair of nodes except a node with itself.
near pattern
    For every source panel, its own nodes and the nodes within
    ``NEAR_RADIUS`` half-lengths of it (``operators.near_pairs``): the pairs
    whose dense entries use product rules.
near corrections
    Dense entry minus plain rule on the near pattern, kept as sparse
    matrices. One application of an operator is the FMM sum plus the
    corrections, so it equals the dense matrix up to the FMM's error (and,
    for the hypersingular operator ``T``, up to quadrature error of far
    pairs: the FMM sums ``d2G/dn_x dn_y`` directly where the dense path
    integrates Maue's form by parts; both are exact for polynomial
    densities up to the Gauss rule's error on smooth integrands).
near system
    The system matrix restricted to the near pattern (plus the identity
    terms); its sparse LU is the preconditioner (right preconditioning, so
    GMRES residuals are true residuals).
radiation-condition rows
    On a closed sound-soft / TM PEC contour without compressed corners the
    fast solver combines the two boundary equations with an operator
    instead of the constant ``beta``: ``E2 + B E1`` with ``B`` the
    on-surface radiation condition ``+j k sqrt(1 + d2/ds2 / k_eps^2)``
    (Antoine & Darbas, M2AN 41 (2007); ``k_eps = k - j 0.4 k^(1/3)
    kappa^(2/3)``), applied by FFT on the contour's arc length. Any ``B``
    gives an exact equation (its right-hand side uses the same ``B``); this
    one makes ``B S`` close to the Dirichlet-to-Neumann map, so the system is
    close to the identity and GMRES needs a few iterations at any frequency
    (the constant ``beta`` needs about ``0.7 k D``, ``D`` the diameter).
recycling
    Every GMRES cycle leaves its Krylov directions behind: ``U`` with
    ``A U = C``, ``C`` orthonormal. A new right-hand side starts from its
    projection on ``C`` and iterates in the complement (GCRO: de Sturler,
    SIAM J. Numer. Anal. 36 (1999); Parks et al., SIAM J. Sci. Comput. 28
    (2006)), so many incident waves on one body share their work.

The FMM sums and their convention mapping live in ``multipole``.
"""

from __future__ import annotations

import math
import time
import warnings
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from numpy.typing import NDArray
from sectionwave.importers.errors import SectionwaveWarning

from .compression import CompressedSystem
from .kernels import kernel_matrices
from .mesh import PanelMesh
from .multipole import fmm_precision, fmm_sums
from .nearfield import serial_numba
from .operators import near_corrections, near_pairs, self_panel_blocks
from .quadrature import gauss_legendre, interpolation_matrix, near_weights
from .system import BoundarySystem, DiscreteSystem, Region

__all__ = [
    "FastMultipole",
    "FastSystem",
    "GmresReport",
    "NotConvergedWarning",
    "hypersingular_kernel",
    "near_blocks",
]

ComplexArray = NDArray[np.complex128]
FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

#: GMRES stops when the relative residual is below this share of the tolerance.
RESIDUAL_SHARE = 0.05
#: Arnoldi steps per cycle before a restart (each cycle is recycled).
CYCLE_LENGTH = 150
#: Cycles allowed per right-hand side.
MAX_CYCLES = 20
#: Share of the available memory the recycled Krylov directions may take.
RECYCLE_MEMORY_SHARE = 0.25


def hypersingular_kernel(
    targets: FloatArray, target_normals: FloatArray, sources: FloatArray, source_normals: FloatArray,
    k: complex,
) -> ComplexArray:
    """``d2G / dn_x dn_y`` at every target by source (zero where they coincide).

    With ``d = x - y``, ``G' = dG/dr = (j k / 4) H1^(2)(k r)`` and
    ``G'' = -k^2 G - G'/r``: ``(k^2 G + 2 G'/r)(d.n_x)(d.n_y)/r^2 - G' (n_x.n_y)/r``.
    """
    import scipy.special as ss

    dx = targets[:, None, 0] - sources[None, :, 0]
    dy = targets[:, None, 1] - sources[None, :, 1]
    r = np.hypot(dx, dy)
    zero = r == 0.0
    rs = np.where(zero, 1.0, r)
    g = -0.25j * ss.hankel2(0, k * rs)
    gp = 0.25j * k * ss.hankel2(1, k * rs)
    dnx = dx * target_normals[:, None, 0] + dy * target_normals[:, None, 1]
    dny = dx * source_normals[None, :, 0] + dy * source_normals[None, :, 1]
    nn = target_normals[:, None, 0] * source_normals[None, :, 0] + target_normals[:, None, 1] * source_normals[None, :, 1]
    h = (k * k * g + 2 * gp / rs) * dnx * dny / rs**2 - gp * nn / rs
    return np.where(zero, 0.0, h)


@dataclass
class NearBlocks:
    """Dense-path entries and plain-rule entries of S, D, D', T on the near pattern (COO, shared indices)."""

    n: int
    rows: IntArray
    cols: IntArray
    exact: dict[str, ComplexArray]
    plain: dict[str, ComplexArray]

    def matrix(self, name: str, which: str) -> sp.csr_matrix:
        """``exact``, ``plain`` or ``correction`` (exact minus plain) of one operator, as CSR."""
        if which == "correction":
            values = self.exact[name] - self.plain[name]
        else:
            values = getattr(self, which)[name]
        return sp.csr_matrix((values, (self.rows, self.cols)), shape=(self.n, self.n))

    @property
    def nnz(self) -> int:
        return int(self.rows.size)


def near_pattern_size(mesh: PanelMesh) -> int:
    """Number of (node, node) pairs on the near pattern, without computing any entry."""
    own = mesh.n_panels * mesh.p * mesh.p
    return own + sum(idx.size * mesh.p for _, idx in near_pairs(mesh, mesh.nodes, exclude_own=True))


def near_blocks(mesh: PanelMesh, k: complex, want: dict[str, bool]) -> NearBlocks:
    """Entries of the requested operators on the near pattern (see ``_near_blocks``); compiled calls on one thread."""
    with serial_numba():
        return _near_blocks(mesh, k, want)


def _near_blocks(mesh: PanelMesh, k: complex, want: dict[str, bool]) -> NearBlocks:
    """Entries of the requested operators (``s``, ``d``, ``dp``, ``t``) on the near pattern.

    Exact entries are those of ``operators.assemble_operators``: the self
    rule on each panel's own block, product-rule corrections for near
    targets, and ``T`` from Maue's identity with the joint terms of the
    panel's two ends; plain entries are what the FMM sums for the same
    pairs (``T``: the hypersingular kernel).
    """
    p, npan = mesh.p, mesh.n_panels
    want_s = want.get("s", False) or want.get("t", False)
    want_t = want.get("t", False)
    flags = (want_s, want.get("d", False), want.get("dp", False), want_t)
    nodes, normals, weights = mesh.nodes, mesh.normals, mesh.weights
    # Own blocks: plain values for every panel at once, then the self rule.
    own_plain = [np.zeros((npan if f else 0, p, p), dtype=complex) for f in flags]
    for a in range(npan):
        sl = slice(a * p, (a + 1) * p)
        mats = kernel_matrices(nodes[sl], normals[sl], nodes[sl], normals[sl], k,
                               want_s=flags[0], want_d=flags[1], want_dp=flags[2], want_dt=flags[3],
                               weights=weights[sl])
        for stack, mat in zip(own_plain, mats):
            if stack.shape[0]:
                stack[a] = mat
    own_exact = [s.copy() for s in own_plain]
    self_panel_blocks(mesh, k, tuple(own_exact))
    near = dict(near_pairs(mesh, nodes, exclude_own=True))
    zt = mesh.complex_nodes()
    tan = mesh.tangent_t[:, 0] + 1j * mesh.tangent_t[:, 1]
    nrm = normals[:, 0] + 1j * normals[:, 1]
    if want_t:
        ds = mesh.arclength_derivative()
        x, _ = gauss_legendre(p)
        at_start = interpolation_matrix(x, np.array([-1.0]))[0]
        at_end = interpolation_matrix(x, np.array([1.0]))[0]
        _, nxt = mesh.neighbours()
    names = ("s", "d", "dp", "t")
    rows: list[IntArray] = []
    cols: list[IntArray] = []
    exact: dict[str, list[ComplexArray]] = {nm: [] for nm in names}
    plain: dict[str, list[ComplexArray]] = {nm: [] for nm in names}
    for a in range(npan):
        sl = slice(a * p, (a + 1) * p)
        own = np.arange(a * p, (a + 1) * p)
        tgt = near.get(a, np.zeros(0, dtype=np.int64))
        targets = np.concatenate([own, tgt])
        plain_blk: list[ComplexArray | None] = [o[a] if f else None for o, f in zip(own_plain, flags)]
        exact_blk: list[ComplexArray | None] = [o[a] if f else None for o, f in zip(own_exact, flags)]
        if tgt.size:
            mats = kernel_matrices(nodes[tgt], normals[tgt], nodes[sl], normals[sl], k,
                                   want_s=flags[0], want_d=flags[1], want_dp=flags[2], want_dt=flags[3],
                                   weights=weights[sl])
            ends = mesh.ends[a]
            log_w, cauchy = near_weights(zt[sl], tan[sl], complex(*ends[0]), complex(*ends[1]), zt[tgt])
            corr = near_corrections(k, zt[tgt], nrm[tgt], zt[sl], nrm[sl], tan[sl], weights[sl],
                                    log_w, cauchy, want=flags)
            for i, f in enumerate(flags):
                if f:
                    fix = corr[i]
                    plain_blk[i] = np.concatenate([own_plain[i][a], mats[i]])
                    exact_blk[i] = np.concatenate([own_exact[i][a], mats[i] + (0.0 if fix is None else fix)])
        rows.append(np.repeat(targets, p))
        cols.append(np.tile(own, targets.size))
        for i, nm in enumerate(names[:3]):
            e_blk, p_blk = exact_blk[i], plain_blk[i]
            if want.get(nm, False) and e_blk is not None and p_blk is not None:
                exact[nm].append(e_blk.ravel())
                plain[nm].append(p_blk.ravel())
        if want_t:
            dt_blk, s_blk = exact_blk[3], exact_blk[0]
            assert dt_blk is not None and s_blk is not None
            t_exact = _maue_block(mesh, k, a, targets, dt_blk, s_blk, ds[a], at_start, at_end, nxt)
            h = hypersingular_kernel(nodes[targets], normals[targets], nodes[sl], normals[sl], k)
            exact["t"].append(t_exact.ravel())
            plain["t"].append((h * weights[sl][None, :]).ravel())
    n = mesh.n_nodes
    empty = np.zeros(0, dtype=complex)
    return NearBlocks(
        n,
        np.concatenate(rows) if rows else np.zeros(0, dtype=np.int64),
        np.concatenate(cols) if cols else np.zeros(0, dtype=np.int64),
        {nm: np.concatenate(v) if v else empty for nm, v in exact.items() if want.get(nm, False)},
        {nm: np.concatenate(v) if v else empty for nm, v in plain.items() if want.get(nm, False)},
    )


def _maue_block(
    mesh: PanelMesh, k: complex, a: int, targets: IntArray, dt_blk: ComplexArray, s_blk: ComplexArray,
    ds: FloatArray, at_start: FloatArray, at_end: FloatArray, nxt: IntArray,
) -> ComplexArray:
    """``T`` on panel ``a``'s columns for ``targets``, as ``operators._maue`` builds it.

    ``Dt d/ds`` on the panel, the joint terms of its start joint and of the
    joint it shares with the next panel (the far end of an open chain's
    last panel), and ``k^2 (n_x . n_y) S``.
    """
    p = mesh.p
    start = mesh.ends[a : a + 1, 0, :]
    if mesh.open_chain and a == mesh.n_panels - 1:
        end = mesh.ends[a : a + 1, 1, :]
    else:
        b = int(nxt[a])
        end = mesh.ends[b : b + 1, 0, :]
    tn = mesh.normals[targets]
    joints = np.vstack([start, end])
    _, _, _, g = kernel_matrices(mesh.nodes[targets], tn, joints, np.zeros_like(joints), k,
                                 want_s=False, want_d=False, want_dp=False, want_dt=True)
    sl = slice(a * p, (a + 1) * p)
    nn = tn @ mesh.normals[sl].T
    return dt_blk @ ds + g[:, :1] * at_start[None, :] - g[:, 1:2] * at_end[None, :] + (k * k) * nn * s_blk


class NotConvergedWarning(SectionwaveWarning):
    """GMRES stopped before reaching its residual target; the result is less accurate than asked."""


class RadiationRows:
    """``B = +j k sqrt(1 + d2/ds2 / k_eps^2)`` on one closed contour, by FFT on a uniform arc-length grid.

    Node values go to the grid by each panel's Lagrange interpolant (the
    panel parameter taken proportional to arc length), the multiplier acts
    on modes up to a third of the grid (higher ones are dropped), and the
    grid goes back to the nodes by 8-point Lagrange interpolation. Only the
    conditioning depends on how well this approximates the ideal operator:
    the equation stays exact because the right-hand side uses the same ``B``.
    """

    POINTS_PER_NODE = 1.0
    BACK_ORDER = 8

    def __init__(self, mesh: PanelMesh, panels: IntArray, k: complex) -> None:
        from scipy.fft import next_fast_len

        p = mesh.p
        lengths = mesh.lengths[panels]
        starts = np.concatenate([[0.0], np.cumsum(lengths)])
        total = float(starts[-1])
        x, _ = gauss_legendre(p)
        node_s = (starts[:-1, None] + 0.5 * (x[None, :] + 1.0) * lengths[:, None]).ravel()
        n_nodes = node_s.size
        m = next_fast_len(max(int(self.POINTS_PER_NODE * n_nodes), 64))
        h = total / m
        grid_s = np.arange(m) * h
        pan = np.clip(np.searchsorted(starts, grid_s, side="right") - 1, 0, panels.size - 1)
        t = np.clip(2.0 * (grid_s - starts[pan]) / lengths[pan] - 1.0, -1.0, 1.0)
        interp = np.stack([interpolation_matrix(x, np.array([ti]))[0] for ti in t])
        cols = pan[:, None] * p + np.arange(p)[None, :]
        self.forward = sp.csr_matrix((interp.ravel(), (np.repeat(np.arange(m), p), cols.ravel())),
                                     shape=(m, n_nodes))
        order = self.BACK_ORDER
        pos = node_s / h
        j0 = np.floor(pos).astype(np.int64) - order // 2 + 1
        off = pos - j0
        wts = np.ones((n_nodes, order))
        for a in range(order):
            for b in range(order):
                if a != b:
                    wts[:, a] *= (off - b) / (a - b)
        back_cols = (j0[:, None] + np.arange(order)[None, :]) % m
        self.back = sp.csr_matrix((wts.ravel(), (np.repeat(np.arange(n_nodes), order), back_cols.ravel())),
                                  shape=(n_nodes, m))
        kappa = float(np.mean(np.abs(mesh.curvature.reshape(mesh.n_panels, p)[panels])))
        kappa = max(kappa, 2 * math.pi / total)
        kr = abs(k)
        k_eps = kr - 0.4j * kr ** (1 / 3) * kappa ** (2 / 3)
        xi = 2 * math.pi * np.fft.fftfreq(m, d=h)
        sigma = 1j * kr * np.sqrt(1.0 - (xi / k_eps) ** 2 + 0j)
        sigma[np.abs(np.fft.fftfreq(m)) > 1.0 / 6.0] = 0.0
        self.sigma = sigma

    def apply(self, values: ComplexArray) -> ComplexArray:
        """``B`` on node values (one column or several)."""
        grid = self.forward @ values
        spec = np.fft.fft(grid, axis=0)
        spec *= self.sigma if spec.ndim == 1 else self.sigma[:, None]
        return self.back @ np.fft.ifft(spec, axis=0)


class _RegionOperator:
    """One region's part of the system matrix, applied matrix-free (FMM plus near corrections)."""

    def __init__(self, system: BoundarySystem, region: Region, precision: int,
                 radiation_nodes: list[IntArray] | None = None) -> None:
        self.k = complex(region.wavenumber)
        self.slots = system.region_slots(region)
        self.pre_e1 = [s.e1 for s in self.slots]
        if radiation_nodes:
            # simple systems only: one slot, local index = node; B replaces beta on these rows
            # (its zero mode, +j k, stands in for it in the preconditioner)
            (slot,) = self.slots
            e1 = slot.e1.copy()
            pre = slot.e1.copy()
            for nodes in radiation_nodes:
                e1[nodes] = 0.0
                pre[nodes] = 1j
            self.slots = [replace(slot, e1=e1)]
            self.pre_e1 = [pre]
        mesh = system.mesh.subset([c for c, _ in region.contours])
        self.mesh = mesh
        self.points = np.asfortranarray(mesh.nodes.T)
        self.normals = np.asfortranarray(mesh.normals.T)
        self.weights = mesh.weights
        self.precision = precision
        has_u = any(bool(np.any(s.u != 0)) for s in self.slots)
        has_dn = any(bool(np.any(s.dudn != 0)) for s in self.slots)
        rows_1 = any(bool(np.any(e != 0)) for e in self.pre_e1)
        rows_2 = any(bool(np.any(s.e2 != 0)) for s in self.slots)
        self.want = {"s": has_dn and rows_1, "d": has_u and rows_1, "dp": has_dn and rows_2, "t": has_u and rows_2}
        self.charge, self.dipole, self.gradient = has_dn, has_u, rows_2
        blocks = near_blocks(mesh, self.k, self.want)
        self.nnz = blocks.nnz
        self.corrections = {nm: blocks.matrix(nm, "correction") for nm, on in self.want.items() if on}
        self._near_exact: dict[str, sp.csr_matrix] | None = {
            nm: blocks.matrix(nm, "exact") for nm, on in self.want.items() if on
        }

    def _densities(self, x: ComplexArray) -> tuple[ComplexArray, ...]:
        m = self.weights.size
        sigma, mu, id_u, id_dn = (np.zeros(m, dtype=complex) for _ in range(4))
        for s in self.slots:
            xs = x[s.unknowns]
            sigma[s.local] += s.sign * s.dudn * xs
            mu[s.local] += s.sign * s.u * xs
            id_u[s.local] += s.u * xs
            id_dn[s.local] += s.dudn * xs
        return sigma, mu, id_u, id_dn

    def apply(self, x: ComplexArray, out: ComplexArray) -> ComplexArray:
        """Add the region's rows of ``A x`` to ``out``; return ``E1`` (with its jump term) at its nodes."""
        sigma, mu, id_u, id_dn = self._densities(x)
        w = self.weights
        pot, grad = fmm_sums(
            self.points, self.normals, self.k,
            w * sigma if self.charge else None, -w * mu if self.dipole else None,
            self.precision, self.gradient,
        )
        e1 = pot
        e2 = np.zeros_like(pot) if grad is None else grad[0] * self.normals[0] + grad[1] * self.normals[1]
        c = self.corrections
        if "s" in c:
            e1 = e1 + c["s"] @ sigma
        if "d" in c:
            e1 = e1 - c["d"] @ mu
        if "dp" in c:
            e2 = e2 + c["dp"] @ sigma
        if "t" in c:
            e2 = e2 - c["t"] @ mu
        e1 = e1 + 0.5 * id_u
        for s in self.slots:
            loc = s.local
            out[s.unknowns] += s.e1 * e1[loc] + s.e2 * (e2[loc] + 0.5 * id_dn[loc])
        return e1

    def near_system(self, n: int) -> sp.csr_matrix:
        """The region's rows of the system matrix on the near pattern (with the identity terms)."""
        exact = self._near_exact or {}
        m = self.weights.size
        parts = []
        for r, r_e1 in zip(self.slots, self.pre_e1):
            for a in self.slots:
                block = sp.csr_matrix((r.local.size, a.local.size), dtype=complex)
                col_dn = sp.diags(a.sign * a.dudn)
                col_u = sp.diags(a.sign * a.u)
                row1, row2 = sp.diags(r_e1), sp.diags(r.e2)
                pick = {nm: mat[r.local][:, a.local] for nm, mat in exact.items()}
                if "s" in pick:
                    block = block + row1 @ pick["s"] @ col_dn
                if "d" in pick:
                    block = block - row1 @ pick["d"] @ col_u
                if "dp" in pick:
                    block = block + row2 @ pick["dp"] @ col_dn
                if "t" in pick:
                    block = block - row2 @ pick["t"] @ col_u
                where = np.full(m, -1, dtype=np.int64)
                where[a.local] = np.arange(a.local.size)
                common = np.flatnonzero(where[r.local] >= 0)
                j = where[r.local[common]]
                ident = 0.5 * (r_e1[common] * a.u[j] + r.e2[common] * a.dudn[j])
                block = block + sp.csr_matrix((ident, (common, j)), shape=block.shape)
                coo = block.tocoo()
                parts.append(sp.coo_matrix((coo.data, (r.unknowns[coo.row], a.unknowns[coo.col])), shape=(n, n)))
        total = sum(parts[1:], parts[0]).tocsr() if parts else sp.csr_matrix((n, n), dtype=complex)
        return total

    def release_near(self) -> None:
        """Drop the exact near entries once the preconditioner is built."""
        self._near_exact = None


class FastSystem:
    """The matrix of a boundary system (plain or with compressed corners), applied without forming it.

    Parameters
    ----------
    system
        A ``BoundarySystem`` or a ``CompressedSystem`` over one.
    precision
        pyfmmlib precision flag (``fmm_precision``).
    """

    def __init__(self, system: DiscreteSystem, precision: int, radiation_rows: bool = True) -> None:
        base = system.base if isinstance(system, CompressedSystem) else system
        if not isinstance(base, BoundarySystem):
            raise TypeError(f"the fast solver cannot apply a {type(system).__name__}")
        self.base = base
        self.n = int(system.n_unknowns)
        self.zones = system.zone_blocks() if isinstance(system, CompressedSystem) else []
        self.rows = self._radiation_rows(base) if radiation_rows else []
        self.regions = [_RegionOperator(base, region, precision, [nodes for nodes, _ in self.rows])
                        for region in base.regions]
        self.matvecs = 0

    def _radiation_rows(self, base: BoundarySystem) -> list[tuple[IntArray, RadiationRows]]:
        """Closed Dirichlet contours without corner zones, in a one-region system: their nodes and ``B``."""
        if not base.is_simple:
            return []
        mesh = base.mesh
        zone_panels = set(int(i) for i in mesh.zone_panels())
        out = []
        for c, f in enumerate(base.formulations):
            panels = np.flatnonzero(mesh.contour_of_panel == c)
            if f.name != "dirichlet" or mesh.open_chain or zone_panels.intersection(panels.tolist()):
                continue
            nodes = (panels[:, None] * mesh.p + np.arange(mesh.p)[None, :]).ravel()
            out.append((nodes, RadiationRows(mesh, panels, base.k)))
        return out

    @property
    def preconditioned(self) -> bool:
        """False when every row is a radiation-condition row (the system is then close to the identity)."""
        covered = sum(nodes.size for nodes, _ in self.rows)
        return covered < self.base.mesh.n_nodes

    def right_hand_sides(self, u_inc: ComplexArray, dudn_inc: ComplexArray) -> ComplexArray:
        """The system's right-hand sides, with ``B u_inc / |k|`` on the radiation-condition rows."""
        rhs = self.base.right_hand_sides(u_inc, dudn_inc)
        kr = abs(self.base.k)
        if not self.rows:
            return rhs
        _, c2, _, _ = self.base._simple_vectors()  # the E2 row weights (one region, one unknown per node)
        for nodes, rows in self.rows:
            rhs[nodes] = c2[nodes, None] * dudn_inc[nodes] + rows.apply(u_inc[nodes]) / kr
        return rhs

    @property
    def near_entries(self) -> int:
        return sum(r.nnz for r in self.regions)

    def _base(self, x: ComplexArray) -> ComplexArray:
        out = np.zeros(self.n, dtype=complex)
        kr = abs(self.base.k)
        for region in self.regions:
            e1 = region.apply(x, out)
            for nodes, rows in self.rows:
                out[nodes] += rows.apply(e1[nodes]) / kr
        return out

    def apply(self, x: ComplexArray) -> ComplexArray:
        """``A x`` (``I + K° R`` with compressed corners)."""
        self.matvecs += 1
        if not self.zones:
            return self._base(x)
        v = np.array(x, dtype=complex, copy=True)
        for idx, r_mat, _ in self.zones:
            v[idx] = r_mat @ x[idx]
        y = self._base(v) - v + x
        for idx, _, a_star in self.zones:
            y[idx] += v[idx] - a_star @ v[idx]
        return y

    def near_matrix(self) -> sp.csc_matrix:
        """The sparse near system (the preconditioner's matrix); frees the regions' exact entries."""
        m = sum((r.near_system(self.n) for r in self.regions[1:]), self.regions[0].near_system(self.n))
        for region in self.regions:
            region.release_near()
        if self.zones:
            eye = sp.identity(self.n, dtype=complex, format="csr")
            r_rows, r_cols, r_vals = [np.arange(self.n)], [np.arange(self.n)], [np.ones(self.n, dtype=complex)]
            z_rows, z_cols, z_vals = [], [], []
            keep = np.ones(self.n, dtype=bool)
            for idx, r_mat, a_star in self.zones:
                keep[idx] = False
                ii, jj = np.meshgrid(idx, idx, indexing="ij")
                r_rows.append(ii.ravel())
                r_cols.append(jj.ravel())
                r_vals.append(r_mat.ravel())
                z_rows.append(ii.ravel())
                z_cols.append(jj.ravel())
                z_vals.append((np.eye(idx.size) - a_star).ravel())
            r_rows[0], r_cols[0], r_vals[0] = r_rows[0][keep], r_cols[0][keep], r_vals[0][keep]
            r_sp = sp.csr_matrix((np.concatenate(r_vals), (np.concatenate(r_rows), np.concatenate(r_cols))),
                                 shape=(self.n, self.n))
            z_sp = sp.csr_matrix((np.concatenate(z_vals), (np.concatenate(z_rows), np.concatenate(z_cols))),
                                 shape=(self.n, self.n))
            m = eye + (m - eye + z_sp) @ r_sp
        return m.tocsc()


@dataclass
class GmresReport:
    """Iterations and final relative residuals per right-hand side."""

    iterations: list[int] = field(default_factory=list)
    residuals: list[float] = field(default_factory=list)
    recycled_directions: int = 0
    iterate_s: float = 0.0


class _Recycled:
    """Right-preconditioned GMRES in cycles, with every cycle's directions recycled (GCRO)."""

    def __init__(self, apply: Any, precondition: Any, n: int, rtol: float, max_vectors: int) -> None:
        self.apply, self.precondition, self.n, self.rtol = apply, precondition, n, rtol
        self.max_vectors = max_vectors
        self.u_blocks: list[ComplexArray] = []
        self.c_blocks: list[ComplexArray] = []

    @property
    def size(self) -> int:
        return sum(c.shape[1] for c in self.c_blocks)

    def _project(self, w: ComplexArray) -> tuple[ComplexArray, ComplexArray]:
        """``w`` minus its part in span(C), and the coefficients (twice, for orthogonality)."""
        coef = np.zeros(self.size, dtype=complex)
        for _ in range(2):
            start = 0
            for c in self.c_blocks:
                h = c.conj().T @ w
                w = w - c @ h
                coef[start : start + c.shape[1]] += h
                start += c.shape[1]
        return w, coef

    def _u_times(self, coef: ComplexArray) -> ComplexArray:
        """``U coef`` for a vector or a matrix of coefficients."""
        out = np.zeros((self.n, *coef.shape[1:]), dtype=complex)
        start = 0
        for u in self.u_blocks:
            out += u @ coef[start : start + u.shape[1]]
            start += u.shape[1]
        return out

    def solve(self, b: ComplexArray) -> tuple[ComplexArray, int, float]:
        """Solution, Arnoldi steps taken and final relative residual (true, by one more product)."""
        bnorm = float(np.linalg.norm(b))
        if bnorm == 0.0:
            return np.zeros(self.n, dtype=complex), 0, 0.0
        x = np.zeros(self.n, dtype=complex)
        r = b.copy()
        steps = 0
        for _ in range(MAX_CYCLES):
            r, coef = self._project(r)
            if coef.size:
                x += self._u_times(coef)
            if np.linalg.norm(r) <= self.rtol * bnorm:
                r = b - self.apply(x)
                if np.linalg.norm(r) <= self.rtol * bnorm:
                    break
                continue
            dx, r, taken = self._cycle(r, self.rtol * bnorm)
            x += dx
            steps += taken
        residual = float(np.linalg.norm(b - self.apply(x))) / bnorm
        return x, steps, residual

    def _cycle(self, r: ComplexArray, target: float) -> tuple[ComplexArray, ComplexArray, int]:
        from scipy.linalg import qr, solve_triangular

        n, m_max = self.n, CYCLE_LENGTH
        beta = float(np.linalg.norm(r))
        v = np.zeros((n, m_max + 1), dtype=complex)
        z = np.zeros((n, m_max), dtype=complex)
        h = np.zeros((m_max + 1, m_max), dtype=complex)
        bmat = np.zeros((self.size, m_max), dtype=complex)
        rot = np.zeros((m_max + 1, m_max), dtype=complex)  # H under Givens rotations
        cs = np.zeros(m_max, dtype=complex)
        sn = np.zeros(m_max, dtype=complex)
        g = np.zeros(m_max + 1, dtype=complex)
        g[0] = beta
        v[:, 0] = r / beta
        steps = 0
        for j in range(m_max):
            z[:, j] = self.precondition(v[:, j])
            w = self.apply(z[:, j])
            w, bmat[:, j] = self._project(w)
            for _ in range(2):
                hj = v[:, : j + 1].conj().T @ w
                w = w - v[:, : j + 1] @ hj
                h[: j + 1, j] += hj
            h[j + 1, j] = np.linalg.norm(w)
            if h[j + 1, j] > 0:
                v[:, j + 1] = w / h[j + 1, j]
            col = h[: j + 2, j].copy()
            for i in range(j):
                a, bb = col[i], col[i + 1]
                col[i] = np.conj(cs[i]) * a + np.conj(sn[i]) * bb
                col[i + 1] = -sn[i] * a + cs[i] * bb
            rho = np.hypot(abs(col[j]), abs(col[j + 1]))
            cs[j], sn[j] = (col[j] / rho, col[j + 1] / rho) if rho > 0 else (1.0, 0.0)
            col[j], col[j + 1] = rho, 0.0
            g[j + 1] = -sn[j] * g[j]
            g[j] = np.conj(cs[j]) * g[j]
            rot[: j + 2, j] = col
            steps = j + 1
            if abs(g[j + 1]) <= target or h[j + 1, j] == 0:
                break
        y = solve_triangular(rot[:steps, :steps], g[:steps])
        u_part = self._u_times(bmat[:, :steps] @ y) if self.size else 0.0
        dx = z[:, :steps] @ y - u_part
        r_new = r - v[:, : steps + 1] @ (h[: steps + 1, :steps] @ y)
        if self.size + steps <= self.max_vectors:
            q, rr = qr(h[: steps + 1, :steps], mode="economic")
            keep = np.abs(np.diag(rr)) > 1e-14 * np.abs(rr[0, 0])
            if np.all(keep):
                u_new = z[:, :steps] - (self._u_times(bmat[:, :steps]) if self.size else 0.0)
                u_new = solve_triangular(rr.T, u_new.T, lower=True).T
                self.u_blocks.append(np.ascontiguousarray(u_new))
                self.c_blocks.append(np.ascontiguousarray(v[:, : steps + 1] @ q))
        return dx, r_new, steps


@dataclass
class _FastPrepared:
    system: FastSystem
    lu: Any
    rtol: float
    timings_s: dict[str, float]
    max_vectors: int
    report: GmresReport = field(default_factory=GmresReport)
    method_name: str = "fast multipole + GMRES"

    @property
    def condition_estimate(self) -> float | None:
        return None

    @property
    def iterations(self) -> list[int]:
        return self.report.iterations

    def right_hand_sides(self, u_inc: ComplexArray, dudn_inc: ComplexArray) -> ComplexArray:
        """Right-hand sides of the equations this solver iterates on (see ``FastSystem``)."""
        return self.system.right_hand_sides(u_inc, dudn_inc)

    def solve(self, rhs: ComplexArray) -> ComplexArray:
        t0 = time.perf_counter()
        precondition = self.lu.solve if self.lu is not None else (lambda v: v)
        krylov = _Recycled(self.system.apply, precondition, self.system.n, self.rtol, self.max_vectors)
        out = np.zeros_like(rhs, dtype=complex)
        for col in range(rhs.shape[1]):
            out[:, col], steps, residual = krylov.solve(rhs[:, col])
            self.report.iterations.append(steps)
            self.report.residuals.append(residual)
        self.report.recycled_directions = krylov.size
        worst = max(self.report.residuals, default=0.0)
        if worst > 10 * self.rtol:
            warnings.warn(
                f"GMRES reached a relative residual of {worst:.1e}, above its target {self.rtol:.1e}",
                NotConvergedWarning, stacklevel=2,
            )
        self.report.iterate_s += time.perf_counter() - t0
        return out


@dataclass(frozen=True)
class FastMultipole:
    """GMRES with FMM products and a sparse near-field preconditioner; many right-hand sides recycle.

    ``tolerance`` is the run's requested accuracy: GMRES stops at
    ``RESIDUAL_SHARE * tolerance`` and the FMM is asked for a hundredth of it.
    """

    tolerance: float = 1e-8
    name: str = "fast multipole + GMRES"

    @property
    def residual_target(self) -> float:
        return RESIDUAL_SHARE * self.tolerance

    def memory_bytes(self, system: DiscreteSystem) -> int:
        from .plan import fast_memory_bytes

        return fast_memory_bytes(system)

    def prepare(self, system: DiscreteSystem) -> _FastPrepared:
        from .solve import available_memory_bytes

        t0 = time.perf_counter()
        fast = FastSystem(system, fmm_precision(0.1 * self.residual_target))
        t1 = time.perf_counter()
        lu = None
        if fast.preconditioned:
            near = fast.near_matrix()
            lu = spla.splu(near, permc_spec="COLAMD")
            del near
        t2 = time.perf_counter()
        budget = RECYCLE_MEMORY_SHARE * available_memory_bytes()
        max_vectors = int(budget // (2 * 16 * max(fast.n, 1)))
        return _FastPrepared(fast, lu, self.residual_target,
                             {"assemble_s": t1 - t0, "precondition_s": t2 - t1}, max_vectors)
