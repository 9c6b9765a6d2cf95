"""A scattering solve on a coarse mesh whose corners are compressed by RCIP.

Glossary
--------
coarse mesh
    The wavelength- and geometry-sized mesh of ``build_panels`` with no
    corner refinement, rebuilt next to every corner so that the two
    panels touching it on each side have equal parameter length (a
    ``CornerZone``). No corner costs more than these four panels.
formulations
    ``dirichlet`` (TM PEC, sound-soft; ``u = 0``): the direct combined
    equation ``psi/2 + D' psi + beta S psi = du_inc/dn + beta u_inc``
    (``E2 + beta E1`` of ``formulations``). It is T-free and of the second
    kind: identity plus the adjoint double layer, whose Mellin symbol at
    a corner keeps ``I/2 + D'`` invertible (the adjoint double layer of
    a Lipschitz curve, Verchota 1984, from memory), plus the compact
    ``beta S``. With ``Im beta != 0`` it has no interior resonances (the
    argument in ``formulations``). Its unknown is the physical ``psi``, so
    it is used as it is; the indirect Brakhage-Werner form is not needed.
    ``neumann-regularised`` and ``robin-regularised`` (TE PEC, sound-hard;
    impedance ``psi = lam u``): the regularised combined field equation,
    E1 plus ``c S_reg`` times E2 with ``S_reg`` the single layer at the
    imaginary wavenumber ``-j |k|`` (Bruno, Elling & Turc 2012), written
    as a 2 x 2 block system in ``u`` and the residual of E2 so that RCIP
    sees single operators only (details in ``system_for``). Second kind
    and resonance-free; it doubles the unknowns.
    ``neumann`` and ``robin``: the direct Burton-Miller equation
    ``E1 + alpha E2`` (``T`` through Maue's identity and its joint terms),
    as the dyadic solver uses. It is *not* of the second kind (``T`` is
    hypersingular), but RCIP's algebra holds for it unchanged: ``K°`` is
    smooth across zone boundaries, and the local blocks are inverted with
    rows equilibrated. RCIP then reproduces dyadic refinement of the same
    discretisation at the cost of the coarse mesh, with the same unknown
    count as Dirichlet. Measured (``benchmarks/bench_rcip.py``, tests): it
    agrees with the regularised system to 1e-10, with Kress's reference
    to 1e-10, and is one to two digits closer to the exact identities;
    resonance-free by ``Im alpha != 0`` (checked at ``ka = j'_11, j_01``).
recursion depth
    ``corners.levels_for``: ``log2(1/tol) / min(nu, 1) + 6`` levels, with
    ``nu = pi / alpha`` the corner's singular exponent, so the innermost
    panel is ``delta 2^-n`` long (46 levels for a convex right angle at
    1e-8, 66 at 1e-12). The recursion does not stop early: a level costs
    about 20 ms, and truncation is the only error it controls.
traces
    ``u`` and ``psi`` returned on the coarse nodes are the *weighted*
    values ``R rho~ = P_W^T rho_fine`` in the corner zones (see
    ``corners``): exact for every quadrature of a function that is smooth
    on the coarse zone panels (far field, extinction, scattering width,
    the potentials at points not too close to a corner), not point values
    near a corner. Measured on the unit square at k = 5 (zone panels
    ``h = 0.25``) against a mesh with ``h = 0.031``: the near field from
    ``nearfield.field_at_points`` agrees to 3e-11 (TM) and 1e-13 (TE) at
    ``0.4 h`` from the tip and beyond, 4e-9 / 7e-12 at ``0.2 h``, 2e-5 /
    3e-7 at ``0.02 h``. Closer than that, ``fine_traces`` rebuilds the
    fine density by running the recursion backwards (Helsing's tutorial,
    "reconstruction") on a mesh refined toward every tip; with 14 levels
    the near field at ``0.004 h`` from the tip then agrees between the two
    meshes to 9e-12 (TM) and 1e-13 (TE). ``C_abs`` of an impedance surface
    (a quadratic form in the traces) should also use the fine traces.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.linalg as la
from numpy.typing import NDArray

from .corners import (
    CornerSide,
    CornerZone,
    RcipError,
    compressed_inverse,
    levels_for,
    reconstruct_zone,
)
from .formulations import Dirichlet, Formulation, Neumann, Robin
from .mesh import BoundaryContour, PanelMesh, build_panels
from .operators import assemble_operators
from .system import BoundarySystem

__all__ = ["RcipSolution", "coarse_corner_mesh", "fields_of", "fine_traces", "rcip_solve", "system_for"]

FloatArray = NDArray[np.float64]
ComplexArray = NDArray[np.complex128]

KINDS = ("dirichlet", "neumann", "robin", "neumann-regularised", "robin-regularised")
#: Coupling of the regularised sound-hard system (any value with a non-zero
#: imaginary part and ``c != -2`` keeps it uniquely solvable, see ``system_for``).
REGULARISER_COUPLING = 1j


def fields_of(kind: str) -> int:
    """Unknowns per node of a formulation."""
    return 2 if kind.endswith("-regularised") else 1


@dataclass
class RcipSolution:
    """Traces on the coarse mesh (weighted in the corner zones) and bookkeeping.

    ``n_unknowns`` is the size of the dense system solved (twice the
    nodes for the regularised sound-hard block system).
    """

    mesh: PanelMesh
    zones: list[CornerZone]
    u: ComplexArray
    psi: ComplexArray
    levels: list[int]
    compressions: int
    n_unknowns: int
    timings_s: dict[str, float] = field(default_factory=dict)
    kind: str = ""
    k: float = 0.0
    lam: complex = 0.0
    rho_tilde: ComplexArray | None = None
    histories: list[dict[int, tuple[ComplexArray, ComplexArray, ComplexArray]]] | None = None


def coarse_corner_mesh(
    boundaries: Sequence[BoundaryContour],
    *,
    p: int = 16,
    tolerance: float = 1e-8,
    max_panel_wavelengths: float = 1.0,
) -> tuple[PanelMesh, list[CornerZone]]:
    """The coarse mesh with two equal panels on each side of every corner.

    The panel next to a corner on each side gets the length ``h`` of the
    shorter of the two panels ``build_panels`` put there (without corner
    refinement), at most a quarter of a side that ends in corners at both
    ends; the rest of each segment keeps that mesh's panel size.
    """
    base = build_panels(
        boundaries, p=p, tolerance=tolerance, max_panel_wavelengths=max_panel_wavelengths, corner_levels=0
    )
    segs = base.segments
    seg_of = base.seg_of_panel
    from scipy.spatial import cKDTree

    tree = (cKDTree(base.nodes), np.repeat(seg_of, base.p))
    new_seg: list[int] = []
    new_t0: list[float] = []
    new_t1: list[float] = []
    new_cont: list[int] = []
    new_corner: list[bool] = []
    zone_specs: list[tuple[int, int, int, int]] = []  # panels of each zone, in contour order
    for c in np.unique(base.contour_of_panel):
        pan = np.flatnonzero(base.contour_of_panel == c)
        order: list[int] = []
        for i in pan:
            if not order or order[-1] != seg_of[i]:
                order.append(int(seg_of[i]))
        info, starts_corner, delta_start, delta_end = _segment_plan(base, segs, pan, order, tree)
        nseg = len(order)
        first_panel_of: dict[int, int] = {}
        last_two_of: dict[int, tuple[int, int]] = {}
        for n, s in enumerate(order):
            a, b = info[s]["a"], info[s]["b"]
            pieces: list[tuple[float, float]] = []
            lo, hi = a, b
            if n in delta_start:
                d = delta_start[n]
                pieces += [(a, a + d), (a + d, a + 2 * d)]
                lo = a + 2 * d
            tail: list[tuple[float, float]] = []
            if n in delta_end:
                d = delta_end[n]
                tail = [(b - 2 * d, b - d), (b - d, b)]
                hi = b - 2 * d
            if hi - lo > 1e-9 * (b - a):
                pieces += _between(info[s]["breaks"], lo, hi, lo - a, b - hi)
            elif pieces and tail:
                # the two zones meet: close the tiny gap inside the outer panels
                pieces[-1] = (pieces[-1][0], hi)
            pieces += tail
            for k_, (x0, x1) in enumerate(pieces):
                if k_ == 0:
                    first_panel_of[n] = len(new_seg)
                new_seg.append(s)
                new_t0.append(x0)
                new_t1.append(x1)
                new_cont.append(int(c))
                new_corner.append(k_ == 0 and starts_corner[n])
            last_two_of[n] = (len(new_seg) - 2, len(new_seg) - 1)
        for n in delta_start:  # one zone per corner, keyed by its outgoing segment
            m_in = (n - 1) % nseg
            i_out = first_panel_of[n]
            i_oi, i_ii = last_two_of[m_in]
            zone_specs.append((i_oi, i_ii, i_out, i_out + 1))
    mesh = PanelMesh(
        p, segs, np.array(new_seg), np.array(new_t0), np.array(new_t1), np.array(new_cont),
        base.body_of_contour, np.array(new_corner),
    )
    mesh = _with_zones(mesh, zone_specs, segs)
    return mesh, list(mesh.corner_zones)


def _segment_plan(
    base: PanelMesh, segs: Any, pan: NDArray[np.int64], order: list[int], tree: Any
) -> tuple[dict[int, dict[str, Any]], list[bool], dict[int, float], dict[int, float]]:
    """Per segment of one contour: range, break points, corner at its start, zone panel lengths.

    The zone panels' parameter lengths at the segment's start and end make
    the panels touching each corner equally long on both sides.
    """
    seg_of, t0, t1 = base.seg_of_panel, base.t0, base.t1
    # each segment's parameter range, panel lengths, and whether it starts at a corner
    info: dict[int, dict[str, Any]] = {}
    for s in order:
        mine = pan[seg_of[pan] == s]
        info[s] = {
            "a": float(t0[mine].min()), "b": float(t1[mine].max()),
            "corner": bool(base.corner_at_start[mine[np.argmin(t0[mine])]]),
            "first": float(base.lengths[mine[np.argmin(t0[mine])]]),
            "last": float(base.lengths[mine[np.argmax(t1[mine])]]),
            "breaks": np.unique(np.concatenate([t0[mine], t1[mine]])),
        }
    nseg = len(order)
    starts_corner = [info[s]["corner"] for s in order]
    ends_corner = [starts_corner[(n + 1) % nseg] for n in range(nseg)]

    h_corner: dict[int, float] = {}  # keyed by position of the outgoing segment
    for n, s in enumerate(order):
        if not starts_corner[n]:
            continue
        s_in = order[n - 1]
        lim = []
        for ss, nn in ((s_in, (n - 1) % nseg), (s, n)):
            both = starts_corner[nn] and ends_corner[nn]
            lim.append(_length(segs[ss], info[ss]["a"], info[ss]["b"]) / (4.0 if both else 2.0))
        # other boundary (the far face of a thin rib, a neighbouring body) must lie well
        # outside the zone, whose far part K deg is taken to be smooth on the zone's scale
        corner = segs[s].points(np.array([info[s]["a"]]))[0]
        lim.append(0.25 * _clearance(tree, corner, {s, s_in}))
        h_corner[n] = min(info[s]["first"], info[s_in]["last"], *lim)
    delta_start: dict[int, float] = {}
    delta_end: dict[int, float] = {}
    for n, h in h_corner.items():
        s, s_in = order[n], order[n - 1]
        sp_out = float(np.hypot(*segs[s].derivative(np.array([info[s]["a"]]))[0]))
        sp_in = float(np.hypot(*segs[s_in].derivative(np.array([info[s_in]["b"]]))[0]))
        delta_start[n] = h / sp_out
        delta_end[(n - 1) % nseg] = h / sp_in

    return info, starts_corner, delta_start, delta_end


def _clearance(tree: Any, point: FloatArray, own: set[int]) -> float:
    """Distance from ``point`` to the nearest node of the sizing mesh on other segments."""
    kd, seg_of_node = tree
    for count in (64, 512, 4096, kd.n):
        dist, idx = kd.query(point, k=min(count, kd.n))
        dist, idx = np.atleast_1d(dist), np.atleast_1d(idx)
        other = np.array([int(seg_of_node[i]) not in own for i in idx])
        if other.any():
            return float(dist[other][0])
        if count >= kd.n:
            break
    return float("inf")


def _between(breaks: FloatArray, lo: float, hi: float, zone_lo: float, zone_hi: float) -> list[tuple[float, float]]:
    """Panels between the zones of a segment: the sizing mesh's own panels, without slivers.

    Break points closer to a zone than half the zone's size are dropped, so
    that no panel next to a zone is much shorter than it; ``regrade`` then
    restores the neighbour ratio.
    """
    inner = [float(x) for x in breaks if lo + 0.5 * max(zone_lo, 0.0) < x < hi - 0.5 * max(zone_hi, 0.0)]
    edges = [lo, *inner, hi]
    return list(zip(edges[:-1], edges[1:]))


def _with_zones(mesh: PanelMesh, zone_specs: list[tuple[int, int, int, int]], segs: Any) -> PanelMesh:
    zones: list[CornerZone] = []
    for i_oi, i_ii, i_io, i_oo in zone_specs:
        s_in, s_out = int(mesh.seg_of_panel[i_ii]), int(mesh.seg_of_panel[i_io])
        tc_in, tc_out = float(mesh.t1[i_ii]), float(mesh.t0[i_io])
        d_in = tc_in - float(mesh.t0[i_ii])
        d_out = float(mesh.t1[i_io]) - tc_out
        zones.append(
            CornerZone(
                point=segs[s_out].points(np.array([tc_out]))[0],
                incoming=CornerSide(segs[s_in], tc_in, -1),
                outgoing=CornerSide(segs[s_out], tc_out, +1),
                panels=(i_oi, i_ii, i_io, i_oo),
                delta=(d_in, d_out),
                outer=(tc_in - float(mesh.t0[i_oi]), float(mesh.t1[i_oo]) - tc_out),
            )
        )
    mesh.corner_zones = tuple(zones)
    return mesh


def _length(segment: Any, a: float, b: float) -> float:
    """Arc length of ``segment`` between parameters ``a`` and ``b`` (Gauss-Legendre)."""
    x, w = np.polynomial.legendre.leggauss(32)
    t = a + (b - a) * 0.5 * (x + 1.0)
    d = segment.derivative(t)
    return float(0.5 * (b - a) * np.dot(w, np.hypot(d[:, 0], d[:, 1])))


def _standard(kind: str, lam: complex) -> Formulation:
    """The engine's own formulation of a kind, with the plain rows compression needs."""
    if kind.startswith("dirichlet"):
        return Dirichlet()
    if kind.startswith("neumann"):
        return Neumann(balanced=False)
    return Robin(lam, balanced=False)


def system_for(kind: str, k: float, lam: complex = 0.0) -> Any:
    """The full system matrix on any mesh (global or local) for one formulation.

    Returns a function ``mesh -> A``. Dirichlet: unknown ``psi / |k|``,
    ``A = I/2 + D' + beta S``. Neumann: unknown ``u``,
    ``A = I/2 - D - alpha T``. Robin: unknown ``u``,
    ``A = I/2 - D + lam S + alpha (lam (I/2 + D') - T)``.
    Neumann, regularised: unknowns ``u`` and ``w' = w / |k|``, with
    ``w = T u + du_inc/dn`` (zero at the solution: the residual of E2),

        [ I/2 - D      -c |k| S_reg ] [u ]   [ u_inc           ]
        [ -T / |k|     I            ] [w'] = [ du_inc/dn / |k| ]

    whose Schur complement ``I/2 - D - c S_reg T`` is the regularised
    combined equation: E1 plus ``c S_reg`` times E2, ``S_reg`` the single
    layer at the imaginary wavenumber ``-j |k|`` (kernel ``K0(|k| r) / (2 pi)``,
    positive definite). By Calderon's identity ``S T = D^2 - I/4`` (plus a
    compact part when the wavenumbers differ) it is
    ``(1/2 + c/4) I - D - c D^2 + compact``, of the second kind
    (Bruno, Elling & Turc, Int. J. Numer. Meth. Eng. 91, 2012, regularised
    combined field equations; from memory). Uniqueness: for a null vector,
    the double-layer potential ``W = D u`` has inside the body
    ``W = -c S_reg dW/dn``; Green's first identity makes
    ``conj(c) <S_reg phi, phi>`` real, so ``Im c != 0`` forces ``dW/dn = 0``,
    ``W = 0`` inside and (exterior Neumann uniqueness) outside, hence ``u = 0``.
    Writing the composition as a block system keeps every block a single
    operator whose far part is smooth, which RCIP needs.
    Robin, regularised: the same with ``psi = lam u`` in E1 and E2,
    ``A11 = I/2 - D + lam S`` and ``A21 = (lam (I/2 + D') - T) / |k|``;
    the added terms are compact, so the system stays of the second kind.
    """
    if kind not in KINDS:
        raise RcipError(f"unknown boundary kind {kind!r}; expected one of {KINDS}")
    standard = _standard(kind, lam)

    def build(mesh: PanelMesh) -> ComplexArray:
        n = mesh.n_nodes
        eye = np.eye(n)
        if kind.endswith("-regularised"):
            robin = kind.startswith("robin")
            ops = assemble_operators(mesh, k, need_s=True, need_d=True, need_dp=robin, need_t=True)
            reg = assemble_operators(mesh, -1j * abs(k), need_s=True, need_d=False, need_dp=False, need_t=False)
            assert ops.D is not None and ops.T is not None and ops.S is not None and reg.S is not None
            c = REGULARISER_COUPLING
            a11 = 0.5 * eye - ops.D
            a21 = -ops.T
            if robin:
                assert ops.Dp is not None
                a11 = a11 + lam * ops.S
                a21 = a21 + lam * (0.5 * eye + ops.Dp)
            return np.block([
                [a11, -c * abs(k) * reg.S],
                [a21 / abs(k), eye.astype(complex)],
            ])
        return BoundarySystem(mesh, [standard], k).dense_matrix()

    return build


def rcip_solve(
    boundaries: Sequence[BoundaryContour],
    k: float,
    kind: str,
    u_inc_fn: Any,
    *,
    lam: complex = 0.0,
    p: int = 16,
    tolerance: float = 1e-10,
    max_panel_wavelengths: float = 1.0,
    levels: int | None = None,
    mesh_zones: tuple[PanelMesh, list[CornerZone]] | None = None,
    keep_history: bool = False,
) -> RcipSolution:
    """Solve one scene of a single boundary kind with RCIP at its corners.

    Parameters
    ----------
    boundaries
        Contours to mesh (their wavelength sets the panel size).
    k
        Wavenumber (real, positive).
    kind
        ``"dirichlet"``, ``"neumann"`` or ``"robin"``.
    u_inc_fn
        ``(points, normals) -> (u_inc, du_inc/dn)``, each ``(n, m)``.
    lam
        Robin factor: ``psi = lam u``.
    p, tolerance, max_panel_wavelengths
        Mesh parameters (``tolerance`` also sets the recursion depth).
    levels
        Dyadic levels of every corner (default from the tolerance and angle).
    mesh_zones
        A prepared ``coarse_corner_mesh`` (to reuse it).
    keep_history
        Keep what ``fine_traces`` needs to rebuild the density near corners.

    Returns
    -------
    RcipSolution
    """
    t_start = time.perf_counter()
    mesh, zones = mesh_zones if mesh_zones is not None else coarse_corner_mesh(
        boundaries, p=p, tolerance=tolerance, max_panel_wavelengths=max_panel_wavelengths
    )
    build = system_for(kind, k, lam)
    t_mesh = time.perf_counter()
    a = build(mesh)
    t_asm = time.perf_counter()
    cache: dict[Any, tuple[ComplexArray, ComplexArray, dict[int, tuple[ComplexArray, ComplexArray, ComplexArray]]]] = {}
    histories: list[dict[int, tuple[ComplexArray, ComplexArray, ComplexArray]]] = []
    used_levels: list[int] = []
    compressions = 0
    # K° = A - A* (A* = identity off the zones), then the system I + K° R.
    system = a.copy()
    nf = fields_of(kind)
    n = mesh.n_nodes
    system[np.diag_indices(nf * n)] -= 1.0  # K° off the zones (fixed in the zones below)
    zone_idx = []
    r_list = []
    for z in zones:
        idx1 = np.concatenate([np.arange(i * p, (i + 1) * p) for i in z.panels])
        idx = np.concatenate([idx1 + f * n for f in range(nf)])
        nlev = levels if levels is not None else levels_for(z, tolerance)
        used_levels.append(nlev)
        key = z.key((kind, float(k), complex(lam), nlev, p))
        if key is not None and key in cache:
            r_mat, a_star, hist = cache[key]
        else:
            hist = {}
            r_mat, a_star = compressed_inverse(
                z, build, p=p, n_fields=nf, levels=nlev, history=hist if keep_history else None
            )
            compressions += 1
            if key is not None:
                cache[key] = (r_mat, a_star, hist)
        histories.append(hist)
        # within the zone: K° = A_zone - A*_zone
        system[np.ix_(idx, idx)] = a[np.ix_(idx, idx)] - a_star
        zone_idx.append(idx)
        r_list.append(r_mat)
    t_r = time.perf_counter()
    # right-multiply K° by R on each zone's columns, then add I
    for idx, r_mat in zip(zone_idx, r_list):
        system[:, idx] = system[:, idx] @ r_mat
    system[np.diag_indices(nf * n)] += 1.0
    u_inc, dn_inc = u_inc_fn(mesh.nodes, mesh.normals)
    if kind.endswith("-regularised"):
        rhs = np.vstack([u_inc, dn_inc / abs(k)])
    else:
        rhs = BoundarySystem(mesh, [_standard(kind, lam)] * int(mesh.body_of_contour.size), k).right_hand_sides(
            u_inc, dn_inc
        )
    lu = la.lu_factor(system, overwrite_a=True, check_finite=False)
    rho_t = la.lu_solve(lu, rhs, check_finite=False)
    rho = rho_t.copy()
    for idx, r_mat in zip(zone_idx, r_list):
        rho[idx] = r_mat @ rho_t[idx]
    t_solve = time.perf_counter()
    if kind == "dirichlet":
        u = np.zeros_like(rho)
        psi = abs(k) * rho
    elif kind == "neumann":
        u = rho
        psi = np.zeros_like(rho)
    elif kind.endswith("-regularised"):
        u = rho[:n]
        psi = lam * u if kind.startswith("robin") else np.zeros_like(u)
    else:
        u = rho
        psi = lam * rho
    return RcipSolution(
        mesh, zones, u, psi, used_levels, compressions, nf * n,
        {
            "mesh_s": t_mesh - t_start, "assemble_s": t_asm - t_mesh, "compress_s": t_r - t_asm,
            "solve_s": t_solve - t_r, "total_s": t_solve - t_start,
        },
        kind, float(k), complex(lam),
        rho_t if keep_history else None,
        histories if keep_history else None,
    )


def _traces(kind: str, k: float, lam: complex, rho: ComplexArray, n: int) -> tuple[ComplexArray, ComplexArray]:
    """``(u, psi)`` from the unknowns of a formulation (first ``n`` rows per field)."""
    if kind == "dirichlet":
        return np.zeros_like(rho[:n]), abs(k) * rho[:n]
    u = rho[:n]
    return u, (lam * u if kind.startswith("robin") else np.zeros_like(u))


def fine_traces(sol: RcipSolution, depth: int = 20) -> tuple[PanelMesh, ComplexArray, ComplexArray]:
    """Mesh and traces with every corner zone refined ``depth`` times toward its tip.

    The recursion is run backwards (Helsing's tutorial, "reconstruction"):
    at each level the stored ``X`` turns that level's ``rho~`` into the true
    density on the level's two outer panels and the next level's ``rho~``.
    The innermost four panels (within ``delta 2^-depth`` of the tip) keep
    the weighted density of their level. The result feeds the existing
    near-field functions; it is good at distances from a tip beyond about
    ``0.4 delta 2^-depth`` (``delta`` the coarse zone panel).

    Raises
    ------
    RcipError
        If the solution was computed without ``keep_history``.
    """
    if sol.rho_tilde is None or sol.histories is None:
        raise RcipError("solve with keep_history=True to rebuild the fine density")
    mesh, p = sol.mesh, sol.mesh.p
    n = mesh.n_nodes
    nf = fields_of(sol.kind)
    m = sol.rho_tilde.shape[1]
    rho_c = sol.rho_tilde
    # per coarse panel: list of (seg, t0, t1, values (nf, p, m))
    replace: dict[int, list[tuple[int, float, float, ComplexArray]]] = {}
    for z, hist in zip(sol.zones, sol.histories):
        idx1 = np.concatenate([np.arange(i * p, (i + 1) * p) for i in z.panels])
        v = np.concatenate([rho_c[idx1 + f * n] for f in range(nf)])
        replace.update(reconstruct_zone(z, hist, v, mesh, nf, depth))
    seg, t0, t1, cont, vals = [], [], [], [], []
    rho_p = np.stack([rho_c[f * n : (f + 1) * n] for f in range(nf)]).reshape(nf, mesh.n_panels, p, m)
    # the coarse traces off the zones are the compressed ones (R = I there)
    for i in range(mesh.n_panels):
        pieces = replace.get(i, [(int(mesh.seg_of_panel[i]), float(mesh.t0[i]), float(mesh.t1[i]), rho_p[:, i])])
        for sg, a, b, val in pieces:
            seg.append(sg)
            t0.append(a)
            t1.append(b)
            cont.append(int(mesh.contour_of_panel[i]))
            vals.append(val)
    corner_flags = np.zeros(len(seg), dtype=bool)
    for z in sol.zones:  # the corner sits at the start of the first outgoing fine panel
        corner_flags[sum(len(replace.get(i, [0])) for i in range(z.panels[2]))] = True
    fine = PanelMesh(
        p, mesh.segments, np.array(seg), np.array(t0), np.array(t1), np.array(cont),
        mesh.body_of_contour, corner_flags,
    )
    rho_f = np.concatenate([np.concatenate([v_[f] for v_ in vals], axis=0) for f in range(nf)], axis=0)
    u, psi = _traces(sol.kind, sol.k, sol.lam, rho_f, fine.n_nodes)
    return fine, u, psi
