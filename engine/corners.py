"""Recursively compressed inverse preconditioning (RCIP) for corners.

Helsing & Ojala, J. Comput. Phys. 227 (2008); J. Helsing, "Solving
integral equations on piecewise smooth boundaries using the RCIP method:
a tutorial", arXiv 1207.6737 (Abstr. Appl. Anal. 2013).

Glossary
--------
corner zone
    The four coarse panels next to a corner, two on each side, of equal
    parameter length ``delta`` on each side (the outermost two may be
    longer; only the two touching the corner are refined). The part of
    the system matrix whose target *and* source both lie in one zone is
    ``A*``; everything else is ``K° = A - A*`` (``A* = I`` off the zones).
type-c and type-b meshes
    At scale ``s`` the type-c mesh is the four panels with parameter
    offsets ``(2s, s), (s, 0) | (0, s), (s, 2s)`` from the corner (the
    incoming side first, in the contour's direction); the type-b mesh
    halves the two inner panels, six panels in all. The inner four
    panels of the type-b mesh at scale ``s`` are the type-c mesh at
    scale ``s / 2``.
P, P_W
    Prolongation from type-c to type-b node values: the identity on the
    outer panels, degree ``p - 1`` polynomial interpolation onto the two
    halves of each inner panel. ``P_W = W_b P W_c^-1`` with the diagonal
    quadrature weights; ``P_W^T P = I`` because Gauss-Legendre integrates
    products of two interpolants exactly on both meshes.
compressed inverse R
    ``R = P_W^T (A*_fine)^-1 P`` on the coarse zone, ``A*_fine`` the zone
    block discretised on the mesh refined dyadically ``levels`` times
    toward the corner. It is built without ever forming the fine mesh:
    ``R_1 = P_W^T A_b(s_1)^-1 P`` on the finest type-b mesh, then
    ``R_i = P_W^T [F(R_{i-1}^-1) + A_b°(s_i)]^-1 P`` where ``F`` places a
    matrix on the inner four panels and ``A_b°`` is the type-b matrix
    with its inner-inner block removed. ``R_{i-1}^-1`` is never formed:
    ``[[R^-1, B], [C, E]]^-1 = [[I, R B], [C, E]]^-1 diag(R, I)``.
compressed system
    With ``rho~ = A* rho`` the fine system ``(A* + K°) rho = g`` becomes
    ``(I + K°_coarse R) rho~ = g`` on the coarse mesh: ``K°`` maps
    smooth functions to smooth functions across a zone boundary, so it
    is exactly represented on the coarse mesh (Helsing & Ojala 2008).
weighted density
    ``rho_hat = R rho~ = P_W^T rho_fine`` on the coarse zone nodes. For
    any function ``f`` that is a polynomial of degree below ``p`` on each
    coarse panel, ``sum_coarse w f rho_hat = sum_fine w f rho_fine``:
    integrals of smooth functions against the density (far field,
    extinction, the potentials at points farther than a panel from a
    corner) come out right from ``rho_hat`` with the coarse weights,
    although ``rho_hat`` is not the density's value at the nodes.

The local matrices are assembled in coordinates centred on the corner
(straight sides exactly, curved ones by a second-order Taylor expansion
once the panels are below ``TAYLOR_BELOW`` in parameter), so panels of
``2^-60`` of the coarse ones keep full relative accuracy. Everything
here only needs a callable that turns a (local) ``PanelMesh`` into the
full system matrix of the chosen formulation; the formulation lives in
``rcip_system``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sectionwave.importers.curves import Segment
from sectionwave.importers.errors import SectionwaveError

from .mesh import PanelMesh
from .quadrature import gauss_legendre, interpolation_matrix

__all__ = [
    "CornerSide",
    "CornerZone",
    "RcipError",
    "compressed_inverse",
    "levels_for",
    "local_zone_mesh",
    "prolongation",
    "reconstruct_zone",
]

FloatArray = NDArray[np.float64]
ComplexArray = NDArray[np.complex128]
LocalMatrix = Callable[[PanelMesh], ComplexArray]

#: Below this parameter offset from the corner a curved side is evaluated
#: by its second-order Taylor expansion (relative geometric error about
#: ``TAYLOR_BELOW^2``); above it directly (relative rounding ``1e-16 / offset``).
TAYLOR_BELOW = 1e-5
#: Most dyadic levels of the recursion (panels of 2^-120 of the coarse ones).
MAX_LEVELS = 120
#: Fewest levels.
MIN_LEVELS = 12


class RcipError(SectionwaveError):
    """The corner compression cannot be set up (e.g. degenerate geometry)."""


@dataclass(frozen=True)
class CornerSide:
    """One side of a corner: its segment, the corner's parameter, and the direction away from it.

    ``sign`` is ``-1`` for the incoming side (the corner is the segment's
    end, the contour parameter grows toward it) and ``+1`` for the
    outgoing side.
    """

    segment: Segment
    t_corner: float
    sign: int

    def geometry(self, tau: FloatArray) -> tuple[FloatArray, FloatArray, FloatArray]:
        """Offset from the corner, first and second parameter derivatives at offsets ``tau``."""
        tau = np.asarray(tau, dtype=float)
        seg = self.segment
        tc = np.array([self.t_corner])
        d1c = seg.derivative(tc)[0]
        d2c = seg.second_derivative(tc)[0]
        st = self.sign * tau
        off = st[:, None] * d1c[None, :] + 0.5 * (tau**2)[:, None] * d2c[None, :]
        d1 = d1c[None, :] + st[:, None] * d2c[None, :]
        d2 = np.broadcast_to(d2c, (tau.size, 2)).copy()
        if getattr(seg, "kind", "") != "line":
            far = tau > TAYLOR_BELOW
            if np.any(far):
                t = self.t_corner + st[far]
                corner = seg.points(tc)[0]
                off[far] = seg.points(t) - corner
                d1[far] = seg.derivative(t)
                d2[far] = seg.second_derivative(t)
        return off, d1, d2


@dataclass(frozen=True)
class CornerZone:
    """A corner and its four coarse panels.

    ``panels`` are the coarse panel indices in contour order (two incoming,
    two outgoing); ``delta`` the parameter length of the two inner panels
    on each side (incoming, outgoing) and ``outer`` the parameter offsets
    of the outer ends of the zone.
    """

    point: FloatArray
    incoming: CornerSide
    outgoing: CornerSide
    panels: tuple[int, int, int, int]
    delta: tuple[float, float]
    outer: tuple[float, float]

    def renumbered(self, new_index: NDArray[np.int64]) -> CornerZone:
        """The same zone after the mesh's panels were renumbered (``new_index[old] = new``)."""
        from dataclasses import replace

        return replace(self, panels=tuple(int(new_index[i]) for i in self.panels))  # type: ignore[arg-type]

    def key(self, extra: tuple[Any, ...] = ()) -> tuple[Any, ...] | None:
        """A hashable description for reuse of ``R`` between congruent corners (straight sides only)."""
        a, b = self.incoming.segment, self.outgoing.segment
        if getattr(a, "kind", "") != "line" or getattr(b, "kind", "") != "line":
            return None
        da = a.derivative(np.array([0.0]))[0] * self.delta[0]
        db = b.derivative(np.array([0.0]))[0] * self.delta[1]
        ea = a.derivative(np.array([0.0]))[0] * self.outer[0]
        eb = b.derivative(np.array([0.0]))[0] * self.outer[1]
        turn = math.atan2(da[0] * db[1] - da[1] * db[0], float(np.dot(da, db)))

        def r(x: float) -> float:
            return float(f"{x:.13g}")

        return (r(turn), r(float(np.hypot(*da))), r(float(np.hypot(*db))),
                r(float(np.hypot(*ea))), r(float(np.hypot(*eb))), *extra)

    def exterior_angle(self) -> float:
        """Angle of the wedge on the field side (``3 pi / 2`` for a convex right angle)."""
        t_in = self.incoming.segment.derivative(np.array([self.incoming.t_corner]))[0]
        t_out = self.outgoing.segment.derivative(np.array([self.outgoing.t_corner]))[0]
        turn = math.atan2(t_in[0] * t_out[1] - t_in[1] * t_out[0], float(np.dot(t_in, t_out)))
        return math.pi + turn


def levels_for(zone: CornerZone, tolerance: float, exponent: float | None = None) -> int:
    """Dyadic levels of the recursion for a tolerance.

    Near a corner with field-side angle ``alpha`` the fields behave like
    ``r^nu``, ``nu = pi / alpha`` (Meixner's edge condition, from memory)
    and the normal derivative like ``r^(nu - 1)``; the part of the boundary
    within ``delta 2^-n`` of the tip then carries a share of about
    ``2^(-n nu)`` of the density's integral. Since the finest level is
    still discretised (not dropped), this is pessimistic; six levels are
    added for safety. The recursion costs milliseconds per level.
    """
    nu = math.pi / max(zone.exterior_angle(), 1e-3) if exponent is None else exponent
    n = math.ceil(math.log2(1.0 / tolerance) / min(nu, 1.0)) + 6
    return int(min(MAX_LEVELS, max(MIN_LEVELS, n)))


def _panel_arrays(side: CornerSide, tau_a: float, tau_b: float, p: int) -> dict[str, FloatArray]:
    x, w = gauss_legendre(p)
    tau = tau_a + (tau_b - tau_a) * 0.5 * (x + 1.0)
    half = side.sign * (tau_b - tau_a) * 0.5  # dt/dx > 0
    off, d1, d2 = side.geometry(tau)
    ends, _, _ = side.geometry(np.array([tau_a, tau_b]))
    return {"nodes": off, "d1": d1 * half, "d2": d2 * half**2, "ends": ends}


def local_zone_mesh(zone: CornerZone, scale: float, kind: str, p: int) -> PanelMesh:
    """The type-c (``kind='c'``) or type-b (``'b'``) mesh at ``scale`` in corner-centred coordinates.

    ``scale = 1`` is the coarse zone itself (with its outer panels reaching
    ``zone.outer``); smaller scales are the dyadic levels, where the outer
    panels are the ``(2s, s)`` ones.
    """
    da, db = zone.delta
    if scale == 1.0:
        oa, ob = zone.outer
    else:
        oa, ob = 2.0 * da * scale, 2.0 * db * scale
    sa, sb = da * scale, db * scale
    if kind == "c":
        cuts_a = [oa, sa, 0.0]
        cuts_b = [0.0, sb, ob]
    elif kind == "b":
        cuts_a = [oa, sa, 0.5 * sa, 0.0]
        cuts_b = [0.0, 0.5 * sb, sb, ob]
    else:
        raise RcipError(f"unknown zone mesh kind {kind!r}")
    pieces = [(zone.incoming, a, b) for a, b in zip(cuts_a[:-1], cuts_a[1:])]
    pieces += [(zone.outgoing, a, b) for a, b in zip(cuts_b[:-1], cuts_b[1:])]
    arrays = [_panel_arrays(side, a, b, p) for side, a, b in pieces]
    return _mesh_from_arrays(arrays, p)


def _mesh_from_arrays(arrays: list[dict[str, FloatArray]], p: int) -> PanelMesh:
    """A ``PanelMesh`` whose geometry is given node by node (no segments behind it)."""
    _, w = gauss_legendre(p)
    npan = len(arrays)
    mesh = object.__new__(PanelMesh)
    mesh.p = p
    mesh.segments = []
    mesh.seg_of_panel = np.zeros(npan, dtype=np.int64)
    mesh.t0 = np.zeros(npan)
    mesh.t1 = np.ones(npan)
    mesh.contour_of_panel = np.zeros(npan, dtype=np.int64)
    mesh.body_of_contour = np.zeros(1, dtype=np.int64)
    mesh.corner_at_start = np.zeros(npan, dtype=bool)
    mesh.corner_zones = ()
    mesh.open_chain = True
    mesh.nodes = np.vstack([a["nodes"] for a in arrays])
    mesh.tangent_t = np.vstack([a["d1"] for a in arrays])
    dd = np.vstack([a["d2"] for a in arrays])
    mesh.accel_t = dd
    mesh.speed = np.hypot(mesh.tangent_t[:, 0], mesh.tangent_t[:, 1])
    unit = mesh.tangent_t / mesh.speed[:, None]
    mesh.normals = np.column_stack([unit[:, 1], -unit[:, 0]])
    mesh.curvature = (mesh.tangent_t[:, 0] * dd[:, 1] - mesh.tangent_t[:, 1] * dd[:, 0]) / mesh.speed**3
    mesh.weights = np.tile(w, npan) * mesh.speed
    mesh.ends = np.stack([a["ends"] for a in arrays])
    mesh.lengths = mesh.weights.reshape(npan, p).sum(axis=1)
    return mesh


def prolongation(p: int) -> FloatArray:
    """``P`` from type-c to type-b node values of one field, shape ``(6p, 4p)``."""
    x, _ = gauss_legendre(p)
    split = interpolation_matrix(x, np.concatenate([0.5 * (x - 1.0), 0.5 * (x + 1.0)]))
    out = np.zeros((6 * p, 4 * p))
    eye = np.eye(p)
    out[0:p, 0:p] = eye
    out[p : 3 * p, p : 2 * p] = split
    out[3 * p : 5 * p, 2 * p : 3 * p] = split
    out[5 * p : 6 * p, 3 * p : 4 * p] = eye
    return out


def _inner_outer(p: int, n_fields: int) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Indices (in a type-b matrix of ``n_fields`` stacked fields) of the inner four and outer two panels."""
    nb = 6 * p
    inner = np.concatenate([f * nb + np.arange(p, 5 * p) for f in range(n_fields)])
    outer = np.concatenate([f * nb + np.r_[np.arange(0, p), np.arange(5 * p, 6 * p)] for f in range(n_fields)])
    return inner, outer


def _stacked(mat: FloatArray, n_fields: int) -> FloatArray:
    return np.asarray(np.kron(np.eye(n_fields), mat), dtype=np.float64)


def _solve_equilibrated(a: ComplexArray, b: ComplexArray) -> ComplexArray:
    """``a^-1 b`` with the rows of ``a`` scaled to unit size first (operators of mixed order)."""
    s = 1.0 / np.maximum(np.max(np.abs(a), axis=1), 1e-300)
    return np.linalg.solve(a * s[:, None], b * s[:, None])


def compressed_inverse(
    zone: CornerZone,
    local_matrix: LocalMatrix,
    *,
    p: int,
    n_fields: int,
    levels: int,
    history: dict[int, tuple[ComplexArray, ComplexArray, ComplexArray]] | None = None,
) -> tuple[ComplexArray, ComplexArray]:
    """``R`` for one corner and the zone's own coarse block ``A*`` (type-c at scale 1).

    Parameters
    ----------
    zone
        The corner and its coarse panels.
    local_matrix
        Full system matrix on a local mesh, unknowns ordered field after
        field, each in node order; it must be the same function that, on
        the coarse mesh, gives the global matrix.
    p
        Nodes per panel.
    n_fields
        Unknowns per node (1, or 2 for a block system).
    levels
        Dyadic levels below the coarse zone.
    history
        If given, filled with ``{level: (X, R, B)}`` for the reconstruction
        of the fine density: ``X`` maps ``rho~`` of the zone at that level
        (type-c at scale ``2^-(level-1)``) to the type-b vector, whose two
        outer panels hold the density itself and whose inner four hold the
        next level's weighted density; ``R`` is that level's compressed
        inverse and ``B`` the type-b block from outer sources to inner
        targets, so that the next level's ``rho~ = (P rho~)_inner - B rho_outer``.

    Returns
    -------
    R, A_star
        Both ``(4 p n_fields)`` square, in the zone's coarse node order.
    """
    if levels < 1:
        raise RcipError("RCIP needs at least one level")
    with _few_threads():
        return _compressed_inverse(zone, local_matrix, p=p, n_fields=n_fields, levels=levels, history=history)


def _blas_thread_setter() -> tuple[Any, Any] | None:
    """``(get, set)`` of the thread count of numpy's bundled OpenBLAS, if it can be found."""
    import ctypes
    import glob
    import os

    libs = os.path.join(os.path.dirname(np.__file__), os.pardir, "numpy.libs", "*openblas*")
    for path in glob.glob(libs):
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        for get_name, set_name in (
            ("scipy_openblas_get_num_threads64_", "scipy_openblas_set_num_threads64_"),
            ("openblas_get_num_threads64_", "openblas_set_num_threads64_"),
            ("openblas_get_num_threads", "openblas_set_num_threads"),
        ):
            if hasattr(lib, get_name) and hasattr(lib, set_name):
                return getattr(lib, get_name), getattr(lib, set_name)
    return None


@contextmanager
def _few_threads() -> Iterator[None]:
    """One thread for compiled loops and BLAS while the tiny local matrices are handled.

    Parallel loops and threaded BLAS on 96 x 96 matrices cost more in
    thread wake-ups than they save, many times more on a loaded machine.
    """
    import numba

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    blas = _blas_thread_setter()
    blas_before = int(blas[0]()) if blas is not None else 0
    if blas is not None:
        blas[1](1)
    try:
        yield
    finally:
        numba.set_num_threads(before)
        if blas is not None:
            blas[1](blas_before)


def _compressed_inverse(
    zone: CornerZone,
    local_matrix: LocalMatrix,
    *,
    p: int,
    n_fields: int,
    levels: int,
    history: dict[int, tuple[ComplexArray, ComplexArray, ComplexArray]] | None,
) -> tuple[ComplexArray, ComplexArray]:
    pc = prolongation(p)
    inner, outer = _inner_outer(p, n_fields)
    r_mat: ComplexArray | None = None
    for level in range(levels, 0, -1):
        scale = 2.0 ** (-(level - 1))
        fine = local_zone_mesh(zone, scale, "b", p)
        coarse_w = local_zone_mesh(zone, scale, "c", p).weights
        wb = np.tile(fine.weights, n_fields)
        wc = np.tile(coarse_w, n_fields)
        pp = _stacked(pc, n_fields)
        pwt = (pp * wb[:, None]).T / wc[:, None]  # P_W^T = W_c^-1 P^T W_b
        a_b = local_matrix(fine)
        if r_mat is None:
            x = _solve_equilibrated(a_b, pp.astype(complex))
        else:
            n = a_b.shape[0]
            mat = a_b.copy()
            # [[R^-1, B], [C, E]]^-1 = [[I, R B], [C, E]]^-1 diag(R, I)
            mat[np.ix_(inner, inner)] = np.eye(inner.size)
            mat[np.ix_(inner, outer)] = r_mat @ a_b[np.ix_(inner, outer)]
            right = np.zeros((n, pp.shape[1]), dtype=complex)
            right[inner] = r_mat @ pp[inner]
            right[outer] = pp[outer]
            x = _solve_equilibrated(mat, right)
        r_mat = pwt @ x
        if history is not None:
            history[level] = (x, r_mat, a_b[np.ix_(inner, outer)])
    assert r_mat is not None
    a_star = local_matrix(local_zone_mesh(zone, 1.0, "c", p))
    return r_mat, a_star


def reconstruct_zone(
    zone: CornerZone,
    history: dict[int, tuple[ComplexArray, ComplexArray, ComplexArray]],
    v: ComplexArray,
    mesh: PanelMesh,
    n_fields: int,
    depth: int,
) -> dict[int, list[tuple[int, float, float, ComplexArray]]]:
    """The fine density on a zone, by running the recursion backwards.

    ``v`` is the compressed unknown ``rho~`` on the zone's coarse nodes
    (fields stacked, ``(n_fields * 4 p, m)``). At each level the stored
    ``X`` turns that level's ``rho~`` into the true density on the level's
    two outer panels and the next level's ``rho~`` (Helsing's tutorial,
    "reconstruction"); the innermost four panels keep the weighted density
    of level ``depth``. Returns, per coarse panel of the zone, its fine
    pieces ``(segment, t0, t1, values (n_fields, p, m))`` in contour order.
    """
    p = mesh.p
    m = v.shape[1]
    nlev = max(history)
    d = int(min(depth, nlev - 1))
    inner = np.concatenate([f * 6 * p + np.arange(p, 5 * p) for f in range(n_fields)])
    outer = np.concatenate([f * 6 * p + np.r_[np.arange(0, p), np.arange(5 * p, 6 * p)] for f in range(n_fields)])
    pp = np.kron(np.eye(n_fields), prolongation(p))
    side_a: list[tuple[float, float, ComplexArray]] = []
    side_b: list[tuple[float, float, ComplexArray]] = []
    da, db = zone.delta
    for level in range(1, d + 1):
        x_mat, _, b_co = history[level]
        yv = x_mat @ v
        y = yv.reshape(n_fields, 6 * p, m)
        s = 2.0 ** (-(level - 1))
        oa = zone.outer[0] if level == 1 else 2 * da * s
        ob = zone.outer[1] if level == 1 else 2 * db * s
        side_a.append((oa, da * s, y[:, 0:p]))
        side_b.append((db * s, ob, y[:, 5 * p : 6 * p]))
        v = (pp @ v)[inner] - b_co @ yv[outer]
    _, r_in, _ = history[d + 1]
    w = (r_in @ v).reshape(n_fields, 4 * p, m)
    s = 2.0 ** (-d)
    side_a += [(2 * da * s, da * s, w[:, 0:p]), (da * s, 0.0, w[:, p : 2 * p])]
    side_b_inner = [(0.0, db * s, w[:, 2 * p : 3 * p]), (db * s, 2 * db * s, w[:, 3 * p : 4 * p])]
    seg_a = int(mesh.seg_of_panel[zone.panels[1]])
    seg_b = int(mesh.seg_of_panel[zone.panels[2]])
    ta, tb = zone.incoming.t_corner, zone.outgoing.t_corner
    pa = [(seg_a, ta - a, ta - b, val) for a, b, val in side_a]
    pb = [(seg_b, tb + a, tb + b, val) for a, b, val in side_b_inner + side_b[::-1]]
    return {
        zone.panels[0]: pa[:1],
        zone.panels[1]: pa[1:],
        zone.panels[2]: pb[:-1],
        zone.panels[3]: pb[-1:],
    }
