"""The discrete boundary system: unknowns, rows, regions, and its dense assembly.

Glossary
--------
region
    A connected part of the plane with one wavenumber, bounded by contours.
    The unbounded region (the surrounding medium) holds the incident waves.
    Each contour of a region carries a sign: +1 when its normal points into
    the region, -1 when it points out of it.
unknowns
    Contour after contour, in mesh order; within a contour whose
    formulation carries ``m`` unknowns per node, unknown ``a`` of its node
    ``i`` sits at ``offset + a * n_nodes + i``. Rows are numbered the same way.
system
    ``A x = b`` with, for every region R and every node i of its boundary,
    row ``r`` of node ``i`` getting ``e1[i, r] E1_R + e2[i, r] E2_R`` (see
    ``formulations``). Built densely here; other solvers may apply it
    without forming it.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache
from typing import Protocol

import numpy as np
from numpy.typing import NDArray

from .formulations import Formulation, SideMap
from .mesh import PanelMesh
from .operators import Operators, assemble_operators

__all__ = ["BoundarySystem", "DiscreteSystem", "Region"]

ComplexArray = NDArray[np.complex128]
IntArray = NDArray[np.int64]


class DiscreteSystem(Protocol):
    """What solvers need of a boundary system (``BoundarySystem``, ``compression.CompressedSystem``)."""

    mesh: PanelMesh
    k: complex

    @property
    def n_unknowns(self) -> int:
        """Number of unknowns (and rows)."""
        ...

    def dense_matrix(self) -> ComplexArray:
        """The system matrix."""
        ...

    def dense_peak_matrices(self) -> float:
        """Complex N x N arrays alive at the peak of a dense solve."""
        ...

    def right_hand_sides(self, u_inc: ComplexArray, dudn_inc: ComplexArray) -> ComplexArray:
        """Right-hand sides from the incident field at the nodes."""
        ...

    def traces(self, x: ComplexArray) -> tuple[ComplexArray, ComplexArray]:
        """``u`` and ``dudn`` on the outside of every node."""
        ...

    def inside_traces(self, x: ComplexArray) -> tuple[ComplexArray, ComplexArray] | None:
        """``u`` and ``dudn`` behind interface contours."""
        ...

    def node_unknowns(self, x: ComplexArray) -> list[ComplexArray]:
        """The unknowns as node arrays, for the error estimate."""
        ...


@dataclass(frozen=True)
class Region:
    """A region: its wavenumber, its contours with their signs, and whether it is unbounded."""

    wavenumber: complex
    contours: tuple[tuple[int, int], ...]
    is_unbounded: bool = False


class BoundarySystem:
    """The boundary equations of every contour of a mesh at one frequency.

    Parameters
    ----------
    mesh
        Panels of every contour.
    formulations
        One per contour (``mesh`` contour order).
    regions
        The regions; by default one unbounded region of wavenumber ``k``
        whose boundary is every contour (impenetrable bodies).
    k
        Wavenumber of the unbounded region.
    """

    def __init__(
        self,
        mesh: PanelMesh,
        formulations: Sequence[Formulation],
        k: complex,
        regions: Sequence[Region] | None = None,
    ) -> None:
        n_contours = int(mesh.body_of_contour.size)
        if len(formulations) != n_contours:
            raise ValueError(f"{len(formulations)} formulations for {n_contours} contours")
        self.mesh = mesh
        self.k = k
        self.formulations = tuple(formulations)
        if regions is None:
            regions = (Region(k, tuple((c, 1) for c in range(n_contours)), is_unbounded=True),)
        self.regions = tuple(regions)
        self._nodes_of = [np.flatnonzero(mesh.contour_of_node == c) for c in range(n_contours)]
        sizes = [f.unknowns_per_node * idx.size for f, idx in zip(self.formulations, self._nodes_of)]
        self._offsets = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
        self._panel_length = np.repeat(mesh.lengths, mesh.p)

    # ------------------------------------------------------------------ layout

    @property
    def n_unknowns(self) -> int:
        """Number of unknowns (and rows)."""
        return int(self._offsets[-1])

    @property
    def is_simple(self) -> bool:
        """One region and one unknown per node: the system is built in one compiled pass."""
        return len(self.regions) == 1 and all(f.unknowns_per_node == 1 for f in self.formulations)

    def _slots(self, contour: int, slot: int) -> IntArray:
        n = self._nodes_of[contour].size
        start = self._offsets[contour] + slot * n
        return np.arange(start, start + n, dtype=np.int64)

    def _side_map(self, contour: int, sign: int, k: complex) -> SideMap:
        f = self.formulations[contour]
        lengths = self._panel_length[self._nodes_of[contour]]
        return f.outside(k, lengths) if sign > 0 else f.inside(k, lengths)

    def _stacked(self, region: Region) -> list[_Slot]:
        """Per unknown slot, the region's nodes that carry it, with their maps."""
        per_slot: dict[int, list[_Slot]] = {}
        start = 0
        for contour, sign in region.contours:
            n = self._nodes_of[contour].size
            side = self._side_map(contour, sign, region.wavenumber)
            local = np.arange(start, start + n, dtype=np.int64)
            for a in range(side.u.shape[1]):
                per_slot.setdefault(a, []).append(
                    _Slot(self._slots(contour, a), local, np.full(n, float(sign)),
                          side.u[:, a], side.dudn[:, a], side.e1[:, a], side.e2[:, a])
                )
            start += n
        return [_Slot.join(parts) for _, parts in sorted(per_slot.items())]

    def region_slots(self, region: Region) -> list[_Slot]:
        """Per unknown slot, the region's nodes carrying it.

        Each slot holds global unknowns, positions among the region's nodes
        (``mesh.subset`` of its contours, in order), signs, column maps and row weights.
        """
        return self._stacked(region)

    def _simple_vectors(self) -> tuple[ComplexArray, ComplexArray, ComplexArray, ComplexArray]:
        """Per node: row weights ``c1, c2`` and column maps ``p_u, p_dudn`` (simple systems)."""
        maps = [self._side_map(c, 1, self.k) for c in range(len(self.formulations))]
        c1 = np.concatenate([m.e1[:, 0] for m in maps])
        c2 = np.concatenate([m.e2[:, 0] for m in maps])
        p_u = np.concatenate([m.u[:, 0] for m in maps])
        p_dudn = np.concatenate([m.dudn[:, 0] for m in maps])
        return c1, c2, p_u, p_dudn

    def dense_peak_matrices(self) -> float:
        """Complex ``N x N`` arrays (N = ``n_unknowns``) alive at the peak of a dense solve.

        The compiled path holds the operators it needs (S, and D, D', T as
        the formulations ask; T is built in place of the tangential-derivative
        matrix) and builds the system in place of S; the general path holds
        the system, one region's operators and the temporaries of one block.
        LU factorises in place. Small per-panel arrays are not counted.
        """
        if self.is_simple:
            _, _, p_u, p_dudn = self._simple_vectors()
            return float(sum(self.needs(p_u, p_dudn).values()))
        n = max(self.n_unknowns, 1)
        worst = 0.0
        for region in self.regions:
            slots = self._stacked(region)
            m = sum(self._nodes_of[c].size for c, _ in region.contours)
            need = self.needs(np.concatenate([s.u for s in slots]), np.concatenate([s.dudn for s in slots]))
            block = max(s.local.size for s in slots)
            worst = max(worst, (sum(need.values()) * m * m + 4 * block * block) / (n * n))
        return 1.0 + worst

    # ------------------------------------------------------------------ assembly

    def dense_matrix(self) -> ComplexArray:
        """The system matrix, assembled densely.

        For simple systems it is built in one compiled pass in place of the
        single-layer matrix, so no second N x N array is allocated.
        """
        if self.is_simple:
            c1, c2, p_u, p_dudn = self._simple_vectors()
            ops = assemble_operators(self.mesh, self.k, **self.needs(p_u, p_dudn))
            return _combine_in_place(ops, c1, c2, p_u, p_dudn)
        return self._general_matrix()

    @staticmethod
    def needs(p_u: ComplexArray, p_dudn: ComplexArray) -> dict[str, bool]:
        """Which operators a set of column maps needs (keyword arguments of ``assemble_operators``)."""
        has_u = bool(np.any(p_u != 0))
        has_dudn = bool(np.any(p_dudn != 0))
        return {"need_s": True, "need_d": has_u, "need_dp": has_dudn, "need_t": has_u}

    def _general_matrix(self) -> ComplexArray:
        n = self.n_unknowns
        out = np.zeros((n, n), dtype=complex)
        for region in self.regions:
            slots = self._stacked(region)
            sub = self.mesh.subset([c for c, _ in region.contours])
            p_u = np.concatenate([s.u for s in slots])
            p_dn = np.concatenate([s.dudn for s in slots])
            ops = assemble_operators(sub, region.wavenumber, **self.needs(p_u, p_dn))
            for row in slots:
                for col in slots:
                    block = _region_block(ops, row.local, col.local, row.e1, row.e2,
                                          col.sign * col.u, col.sign * col.dudn)
                    same = row.local[:, None] == col.local[None, :]
                    ii, jj = np.nonzero(same)
                    block[ii, jj] += 0.5 * (row.e1[ii] * col.u[jj] + row.e2[ii] * col.dudn[jj])
                    out[np.ix_(row.unknowns, col.unknowns)] += block
        return out

    def right_hand_sides(self, u_inc: ComplexArray, dudn_inc: ComplexArray) -> ComplexArray:
        """Right-hand sides, one column per incident wave, from the incident field at the nodes."""
        rhs = np.zeros((self.n_unknowns, u_inc.shape[1]), dtype=complex)
        if self.is_simple:
            c1, c2, _, _ = self._simple_vectors()
            return c1[:, None] * u_inc + c2[:, None] * dudn_inc
        for region in self.regions:
            if not region.is_unbounded:
                continue
            for contour, sign in region.contours:
                idx = self._nodes_of[contour]
                side = self._side_map(contour, sign, region.wavenumber)
                for r in range(side.e1.shape[1]):
                    rows = self._slots(contour, r)
                    rhs[rows] += side.e1[:, r, None] * u_inc[idx] + side.e2[:, r, None] * dudn_inc[idx]
        return rhs

    def traces(self, x: ComplexArray) -> tuple[ComplexArray, ComplexArray]:
        """Total field ``u`` and ``dudn`` on the outside of every node, from the unknowns."""
        if self.is_simple:
            _, _, p_u, p_dudn = self._simple_vectors()
            return p_u[:, None] * x, p_dudn[:, None] * x
        u = np.zeros((self.mesh.n_nodes, x.shape[1]), dtype=complex)
        dudn = np.zeros_like(u)
        for c in range(len(self.formulations)):
            idx = self._nodes_of[c]
            side = self._side_map(c, 1, self.k)
            for a in range(side.u.shape[1]):
                xa = x[self._slots(c, a)]
                u[idx] += side.u[:, a, None] * xa
                dudn[idx] += side.dudn[:, a, None] * xa
        return u, dudn

    def inside_traces(self, x: ComplexArray) -> tuple[ComplexArray, ComplexArray] | None:
        """``u`` and ``dudn`` (along the contour normal) behind interface contours; NaN elsewhere.

        None when no contour is an interface.
        """
        if not any(f.has_inside for f in self.formulations):
            return None
        u = np.full((self.mesh.n_nodes, x.shape[1]), np.nan + 0j)
        dudn = u.copy()
        for c, f in enumerate(self.formulations):
            if not f.has_inside:
                continue
            idx = self._nodes_of[c]
            side = self._side_map(c, -1, self.k)
            u[idx] = 0.0
            dudn[idx] = 0.0
            for a in range(side.u.shape[1]):
                xa = x[self._slots(c, a)]
                u[idx] += side.u[:, a, None] * xa
                dudn[idx] += side.dudn[:, a, None] * xa
        return u, dudn

    def node_unknowns(self, x: ComplexArray) -> list[ComplexArray]:
        """The unknowns as node arrays ``(n_nodes, n_rhs)``, one per unknown slot (zero where absent)."""
        if self.is_simple:
            return [x]
        width = max(f.unknowns_per_node for f in self.formulations)
        out = [np.zeros((self.mesh.n_nodes, x.shape[1]), dtype=complex) for _ in range(width)]
        for c, f in enumerate(self.formulations):
            for a in range(f.unknowns_per_node):
                out[a][self._nodes_of[c]] = x[self._slots(c, a)]
        return out


@dataclass(frozen=True)
class _Slot:
    """One unknown slot of a region's nodes.

    Global unknown indices, positions among the region's nodes, contour
    signs, column maps (``u``, ``dudn``) and row weights (``e1``, ``e2``).
    """

    unknowns: IntArray
    local: IntArray
    sign: NDArray[np.float64]
    u: ComplexArray
    dudn: ComplexArray
    e1: ComplexArray
    e2: ComplexArray

    @staticmethod
    def join(parts: list[_Slot]) -> _Slot:
        names = ("unknowns", "local", "sign", "u", "dudn", "e1", "e2")
        return _Slot(*(np.concatenate([getattr(p, f) for p in parts]) for f in names))


def _region_block(
    ops: Operators, rows: IntArray, cols: IntArray, e1: ComplexArray, e2: ComplexArray,
    su: ComplexArray, sdn: ComplexArray,
) -> ComplexArray:
    """``e1 (S sdn - D su) + e2 (D' sdn - T su)`` on the given rows and columns of a region's operators."""
    block = np.zeros((rows.size, cols.size), dtype=complex)
    pick = np.ix_(rows, cols)
    if ops.S is not None:
        block += e1[:, None] * ops.S[pick] * sdn[None, :]
    if ops.D is not None:
        block -= e1[:, None] * ops.D[pick] * su[None, :]
    if ops.Dp is not None:
        block += e2[:, None] * ops.Dp[pick] * sdn[None, :]
    if ops.T is not None:
        block -= e2[:, None] * ops.T[pick] * su[None, :]
    return block


def _combine_in_place(
    ops: Operators, c1: ComplexArray, c2: ComplexArray, p_u: ComplexArray, p_dudn: ComplexArray
) -> ComplexArray:
    """``A = c1 [(I/2 - D) P_u + S P_dudn] + c2 [(I/2 + D') P_dudn - T P_u]``, written over S."""
    n = p_u.size
    mats = [ops.S, ops.D, ops.Dp, ops.T]
    out = next(m for m in mats if m is not None)
    empty = np.zeros((0, 0), dtype=complex)
    _combine()(out, *(m if m is not None else empty for m in mats), c1, c2, p_u, p_dudn)
    out[np.diag_indices(n)] += 0.5 * (c1 * p_u + c2 * p_dudn)
    return out


@lru_cache(maxsize=1)
def _combine():
    import numba

    @numba.njit(parallel=True, cache=True)
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
