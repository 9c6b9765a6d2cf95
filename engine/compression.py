"""A boundary system whose corners are compressed by RCIP.

Glossary
--------
compressed system
    ``(I + K° R) x~ = b`` on the coarse mesh (``corners`` explains ``K°``,
    ``R`` and ``A*``): the corner zones' own block ``A*`` is folded into
    the compressed inverse ``R``, built by a recursion on each corner alone.
    Off the zones ``R = I`` and ``x~`` is the usual unknown.
weighted unknowns
    ``x = R x~`` on the zones: the unknowns of the fine (dyadically refined)
    discretisation, projected onto the coarse panels by ``P_W^T``. Every
    quadrature of a smooth function against them is right (far field,
    cross sections, fields more than about a zone panel away from a
    corner); they are not point values next to a corner.
formulations
    The rows must not depend on the panel size (the fine levels and the
    coarse mesh must discretise the same equation), so Neumann and Robin
    rows are not balanced here (``balanced=False``). Dirichlet uses the
    T-free combined-field equation ``I/2 + D' + beta S``; Neumann and
    Robin the Burton-Miller equation with T from Maue's identity, which is
    not of the second kind but compresses as well (its far part ``K°`` is
    smooth across zone boundaries): measured against Kress's graded-mesh
    Nystrom method to 1e-10 (tests/engine/test_rcip.py); interfaces the
    second-kind Mueller system.

Implements the same interface as ``system.BoundarySystem`` (``n_unknowns``,
``dense_matrix``, ``right_hand_sides``, ``traces``, ...), so every solver
takes it unchanged.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .corners import CornerZone, compressed_inverse, levels_for, reconstruct_zone
from .mesh import PanelMesh, transmission_exponent
from .system import BoundarySystem

__all__ = ["CompressedSystem"]

ComplexArray = NDArray[np.complex128]
IntArray = NDArray[np.int64]
LocalSystem = Callable[[int, PanelMesh], BoundarySystem]


class CompressedSystem:
    """``system`` with every corner zone of its mesh compressed.

    Parameters
    ----------
    system
        The boundary system on the coarse mesh (its mesh carries the zones).
    local_system
        ``(contour, local_mesh) -> BoundarySystem`` of the same formulation
        and media on a local (open) corner mesh.
    tolerance
        Sets the recursion depth of each corner.
    cache
        Compressed blocks by corner key, shared between solves at one frequency.
    """

    def __init__(
        self,
        system: BoundarySystem,
        local_system: LocalSystem,
        tolerance: float,
        cache: dict[Any, tuple[ComplexArray, ComplexArray, dict[int, Any]]] | None = None,
    ) -> None:
        self.base = system
        self.mesh = system.mesh
        self.k = system.k
        self.formulations = system.formulations
        self.regions = system.regions
        self.local_system = local_system
        self.tolerance = tolerance
        self.cache = {} if cache is None else cache
        self._blocks: list[tuple[IntArray, ComplexArray]] = []
        self._histories: list[dict[int, Any]] = []

    @property
    def n_unknowns(self) -> int:
        return self.base.n_unknowns

    @property
    def zones(self) -> tuple[CornerZone, ...]:
        return self.mesh.corner_zones

    def dense_peak_matrices(self) -> float:
        return self.base.dense_peak_matrices()

    def _zone_unknowns(self, zone: CornerZone) -> tuple[int, IntArray]:
        """The zone's contour and its unknowns, slot after slot, each in node order."""
        p = self.mesh.p
        nodes = np.concatenate([np.arange(i * p, (i + 1) * p) for i in zone.panels])
        contour = int(self.mesh.contour_of_node[nodes[0]])
        first = int(np.flatnonzero(self.mesh.contour_of_node == contour)[0])
        local = nodes - first
        slots = self.formulations[contour].unknowns_per_node
        idx = np.concatenate([self.base._slots(contour, a)[local] for a in range(slots)])
        return contour, idx

    def _levels(self, zone: CornerZone, contour: int) -> int:
        f = self.formulations[contour]
        if not f.has_inside:
            return levels_for(zone, self.tolerance)
        nu = transmission_exponent(2 * math.pi - zone.exterior_angle(), getattr(f, "ratio", 1.0))
        return levels_for(zone, self.tolerance, exponent=nu)

    def _compress(self, zone: CornerZone, contour: int) -> tuple[ComplexArray, ComplexArray, dict[int, Any]]:
        f = self.formulations[contour]
        levels = self._levels(zone, contour)
        signature = (type(f).__name__, getattr(f, "lam", None), getattr(f, "ratio", None),
                     tuple(complex(r.wavenumber) for r in self.regions), levels, self.mesh.p)
        key = zone.key(signature)
        if key is not None and key in self.cache:
            return self.cache[key]
        history: dict[int, Any] = {}
        r_mat, a_star = compressed_inverse(
            zone,
            lambda local: self.local_system(contour, local).dense_matrix(),
            p=self.mesh.p,
            n_fields=f.unknowns_per_node,
            levels=levels,
            history=history,
        )
        result = (r_mat, a_star, history)
        if key is not None:
            self.cache[key] = result
        return result

    def zone_blocks(self) -> list[tuple[IntArray, ComplexArray, ComplexArray]]:
        """Per corner zone: its unknowns, the compressed inverse ``R`` and the zone's own block ``A*``.

        ``I + K° R`` is ``x + (A - I) R x + (I - A*) (R x)`` on each zone, with
        ``A`` the coarse system matrix: how a matrix-free solver applies it.
        """
        self._blocks = []
        self._histories = []
        out = []
        for zone in self.zones:
            contour, idx = self._zone_unknowns(zone)
            r_mat, a_star, history = self._compress(zone, contour)
            self._blocks.append((idx, r_mat))
            self._histories.append(history)
            out.append((idx, r_mat, a_star))
        return out

    def dense_matrix(self) -> ComplexArray:
        """``I + K° R``, built in place of the coarse system matrix."""
        a = self.base.dense_matrix()
        n = a.shape[0]
        stars = [(idx, a[np.ix_(idx, idx)] - a_star) for idx, _, a_star in self.zone_blocks()]
        diag = np.diag_indices(n)
        a[diag] -= 1.0  # K° = A - A* with A* = I off the zones ...
        for idx, block in stars:
            a[np.ix_(idx, idx)] = block  # ... and the zone's own block inside them
        for idx, r_mat in self._blocks:
            a[:, idx] = a[:, idx] @ r_mat
        a[diag] += 1.0
        return a

    def recover(self, x: ComplexArray) -> ComplexArray:
        """The weighted unknowns ``R x~`` (``x~`` off the zones)."""
        if not self._blocks:
            self.zone_blocks()
        out = np.array(x, dtype=complex, copy=True)
        for idx, r_mat in self._blocks:
            out[idx] = r_mat @ x[idx]
        return out

    def right_hand_sides(self, u_inc: ComplexArray, dudn_inc: ComplexArray) -> ComplexArray:
        return self.base.right_hand_sides(u_inc, dudn_inc)

    def traces(self, x: ComplexArray) -> tuple[ComplexArray, ComplexArray]:
        return self.base.traces(self.recover(x))

    def inside_traces(self, x: ComplexArray) -> tuple[ComplexArray, ComplexArray] | None:
        return self.base.inside_traces(self.recover(x))

    def node_unknowns(self, x: ComplexArray) -> list[ComplexArray]:
        """Unknowns per slot for the error estimate, zero on the zones.

        The weighted unknowns are not polynomials on the zone panels, so
        their Legendre tails say nothing there; the recursion depth, set
        from the tolerance, governs the corners' share of the error.
        """
        out = self.base.node_unknowns(self.recover(x))
        p = self.mesh.p
        zone_nodes = [np.arange(i * p, (i + 1) * p) for i in self.mesh.zone_panels()]
        if zone_nodes:
            nodes = np.concatenate(zone_nodes)
            for arr in out:
                arr[nodes] = 0.0
        return out

    def fine_system(
        self, x: ComplexArray, depths: list[int] | None = None
    ) -> tuple[BoundarySystem, ComplexArray]:
        """The system on the mesh refined toward every corner, and its unknowns there.

        The recursion is run backwards on each zone (``corners.reconstruct_zone``)
        ``depths[i]`` levels deep (default 20); the innermost panels keep the
        weighted values of that level. Fields from ``system.traces(x_fine)``
        are right as close to a tip as about 0.4 of the innermost panel.
        """
        mesh, p = self.mesh, self.mesh.p
        m = x.shape[1]
        if not self._blocks:
            self.recover(x)
        replace: dict[int, list[tuple[int, float, float, ComplexArray]]] = {}
        for n, (zone, (idx, _), history) in enumerate(zip(self.zones, self._blocks, self._histories)):
            contour, _ = self._zone_unknowns(zone)
            depth = 20 if depths is None else int(depths[n])
            nf = self.formulations[contour].unknowns_per_node
            replace.update(reconstruct_zone(zone, history, x[idx], mesh, nf, depth))
        seg: list[int] = []
        t0: list[float] = []
        t1: list[float] = []
        cont: list[int] = []
        values: list[ComplexArray] = []
        for i in range(mesh.n_panels):
            c = int(mesh.contour_of_panel[i])
            pieces = replace.get(i)
            if pieces is None:
                first = int(np.flatnonzero(mesh.contour_of_node == c)[0])
                local = np.arange(i * p, (i + 1) * p) - first
                nf = self.formulations[c].unknowns_per_node
                val = np.stack([x[self.base._slots(c, a)[local]] for a in range(nf)])
                pieces = [(int(mesh.seg_of_panel[i]), float(mesh.t0[i]), float(mesh.t1[i]), val)]
            for sg, a0, a1, val in pieces:
                seg.append(sg)
                t0.append(a0)
                t1.append(a1)
                cont.append(c)
                values.append(val)
        fine = PanelMesh(
            p, mesh.segments, np.array(seg), np.array(t0), np.array(t1), np.array(cont),
            mesh.body_of_contour, np.zeros(len(seg), dtype=bool),
        )
        system = BoundarySystem(fine, self.formulations, self.k, self.regions)
        x_fine = np.zeros((system.n_unknowns, m), dtype=complex)
        cont_arr = np.array(cont)
        for c, f in enumerate(self.formulations):
            mine = [values[j] for j in np.flatnonzero(cont_arr == c)]
            for a in range(f.unknowns_per_node):
                x_fine[system._slots(c, a)] = np.concatenate([v[a] for v in mine], axis=0)
        return system, x_fine
