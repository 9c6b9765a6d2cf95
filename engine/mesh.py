"""Panels with Gauss-Legendre nodes on the exact curves.

Glossary
--------
panel
    The image of ``t`` in [-1, 1] on one segment between two segment
    parameters; it carries ``p`` Gauss-Legendre nodes. Panels never straddle
    a joint between segments, so corners sit at panel ends.
sizing
    A piece of a segment longer than ``max_panel_wavelengths`` of the
    shortest wavelength next to it is cut into the fewest pieces of equal
    arc length that meet it (``_equal_pieces``); then a panel is halved
    while it is still longer (by more than ``LENGTH_SLACK``), turns by more than
    ``MAX_TURN_RAD``, its coordinates are not resolved by its polynomial
    to the tolerance, it is more than ``GAP_RATIO`` times longer than the
    distance to a non-adjacent part of the boundary, or it is more than
    twice as long as a neighbour. Panels touching a corner are halved
    toward it ``corner_levels`` times (dyadic refinement).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.spatial import cKDTree
from sectionwave.importers.curves import Contour, Segment
from sectionwave.importers.errors import GeometryError

from .quadrature import differentiation_matrix, gauss_legendre, legendre_analysis_matrix

__all__ = ["BoundaryContour", "PanelMesh", "build_panels", "corner_levels_for", "regrade", "transmission_exponent"]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

#: Largest turn of the tangent along one panel (radians).
MAX_TURN_RAD = 1.0
#: A panel may be at most this many times longer than its distance to a
#: non-adjacent piece of boundary (thin gaps, close bodies).
GAP_RATIO = 1.0
#: Same-contour boundary counts as a gap only if it is this many times
#: farther along the contour than across (a slot at least ten widths deep).
SLOT_RATIO = 20.0
#: Panels are halved in their curve parameter, so on an unevenly
#: parametrised curve the halves differ slightly in length; a neighbour
#: ratio up to 2 * RATIO_SLACK is accepted rather than chasing 2 exactly
#: (which can cascade along the whole curve).
RATIO_SLACK = 1.1
#: A piece cut to the wavelength rule may be this much longer than the rule
#: before it is halved (the cuts interpolate the arc length).
LENGTH_SLACK = 1.02
#: Legendre coefficients of the coordinates below this many rounding units of
#: their size are taken as resolved.
ROUNDING_TAIL = 64.0
#: Cells on which the arc length of a piece is tabulated for equal cuts.
_ARC_CELLS = 64
#: Deepest dyadic refinement toward a corner (panels of 2^-40 of the first
#: one; the near-panel Vandermonde systems stay well posed).
MAX_CORNER_LEVELS = 40
#: Hard cap on the number of panels, far above any dense problem.
MAX_PANELS = 200_000


@dataclass(frozen=True)
class BoundaryContour:
    """A contour to be meshed and the wavelength that limits its panels.

    ``flux_ratio`` (``beta_out / beta_in``) is set for interfaces between
    two media; it sets how singular the fields at its corners are.
    """

    contour: Contour
    body: int
    wavelength_m: float
    flux_ratio: complex | None = None


@dataclass
class PanelMesh:
    """Nodes, weights and geometry of every panel, contour after contour."""

    p: int
    segments: list[Segment]
    seg_of_panel: IntArray
    t0: FloatArray
    t1: FloatArray
    contour_of_panel: IntArray
    body_of_contour: IntArray
    corner_at_start: NDArray[np.bool_]
    #: Corner zones compressed by RCIP (``corners.CornerZone``): their panels are never split.
    corner_zones: tuple[Any, ...] = ()
    #: True for an open chain of panels (a local corner mesh): its ends are not joined.
    open_chain: bool = False
    nodes: FloatArray = field(init=False)
    tangent_t: FloatArray = field(init=False)
    accel_t: FloatArray = field(init=False)
    speed: FloatArray = field(init=False)
    normals: FloatArray = field(init=False)
    curvature: FloatArray = field(init=False)
    weights: FloatArray = field(init=False)
    ends: FloatArray = field(init=False)
    lengths: FloatArray = field(init=False)

    def __post_init__(self) -> None:
        x, w = gauss_legendre(self.p)
        npan = self.n_panels
        nodes = np.empty((npan, self.p, 2))
        d1 = np.empty((npan, self.p, 2))
        d2 = np.empty((npan, self.p, 2))
        ends = np.empty((npan, 2, 2))
        for i in range(npan):
            seg = self.segments[self.seg_of_panel[i]]
            a, b = self.t0[i], self.t1[i]
            t = a + (b - a) * 0.5 * (x + 1.0)
            half = 0.5 * (b - a)
            nodes[i] = seg.points(t)
            d1[i] = seg.derivative(t) * half
            d2[i] = seg.second_derivative(t) * half**2
            ends[i] = seg.points(np.array([a, b]))
        self.nodes = nodes.reshape(-1, 2)
        self.tangent_t = d1.reshape(-1, 2)
        dd = d2.reshape(-1, 2)
        self.accel_t = dd
        self.speed = np.hypot(self.tangent_t[:, 0], self.tangent_t[:, 1])
        unit = self.tangent_t / self.speed[:, None]
        self.normals = np.column_stack([unit[:, 1], -unit[:, 0]])
        self.curvature = (
            self.tangent_t[:, 0] * dd[:, 1] - self.tangent_t[:, 1] * dd[:, 0]
        ) / self.speed**3
        self.weights = np.tile(w, npan) * self.speed
        self.ends = ends
        self.lengths = self.weights.reshape(npan, self.p).sum(axis=1)

    @property
    def n_panels(self) -> int:
        """Number of panels."""
        return int(self.seg_of_panel.size)

    @property
    def n_nodes(self) -> int:
        """Number of nodes (unknowns per field on the boundary)."""
        return self.n_panels * self.p

    @property
    def panel_of_node(self) -> IntArray:
        """Panel index of every node."""
        return np.repeat(np.arange(self.n_panels), self.p)

    @property
    def body_of_node(self) -> IntArray:
        """Body index of every node."""
        return np.repeat(self.body_of_contour[self.contour_of_panel], self.p)

    @property
    def contour_of_node(self) -> IntArray:
        """Contour index of every node."""
        return np.repeat(self.contour_of_panel, self.p)

    def complex_nodes(self) -> NDArray[np.complex128]:
        """Nodes as ``x + i y``."""
        return self.nodes[:, 0] + 1j * self.nodes[:, 1]

    def arclength_derivative(self) -> list[FloatArray]:
        """Per panel, the matrix of d/ds (arc length) acting on node values."""
        dmat = differentiation_matrix(self.p)
        speed = self.speed.reshape(self.n_panels, self.p)
        return [dmat / speed[i][:, None] for i in range(self.n_panels)]

    def legendre_tails(self, values: NDArray[np.complex128]) -> FloatArray:
        """Size of the last two Legendre coefficients of ``values`` on each panel."""
        coef = legendre_analysis_matrix(self.p) @ values.reshape(self.n_panels, self.p).T
        return np.sqrt(np.abs(coef[-1]) ** 2 + np.abs(coef[-2]) ** 2)

    def neighbours(self) -> tuple[IntArray, IntArray]:
        """Previous and next panel of each panel along its (closed) contour."""
        prev = np.empty(self.n_panels, dtype=np.int64)
        nxt = np.empty(self.n_panels, dtype=np.int64)
        for c in np.unique(self.contour_of_panel):
            idx = np.flatnonzero(self.contour_of_panel == c)
            prev[idx] = np.roll(idx, 1)
            nxt[idx] = np.roll(idx, -1)
        return prev, nxt

    def subset(self, contours: Sequence[int]) -> PanelMesh:
        """The mesh of the given contours only, in the given order (renumbered from 0).

        Every contour in mesh order gives the mesh itself (local corner meshes,
        which have no segments to rebuild from, rely on it).
        """
        if list(contours) == list(range(int(self.body_of_contour.size))):
            return self
        order = np.concatenate([np.flatnonzero(self.contour_of_panel == c) for c in contours])
        renumber = {int(c): i for i, c in enumerate(contours)}
        return PanelMesh(
            self.p,
            self.segments,
            self.seg_of_panel[order],
            self.t0[order],
            self.t1[order],
            np.array([renumber[int(c)] for c in self.contour_of_panel[order]], dtype=np.int64),
            self.body_of_contour[np.asarray(contours, dtype=np.int64)],
            self.corner_at_start[order],
        )

    def zone_panels(self) -> NDArray[np.int64]:
        """Panels of the compressed corner zones."""
        return np.array(sorted({int(i) for z in self.corner_zones for i in z.panels}), dtype=np.int64)

    def split(self, panels: Sequence[int]) -> PanelMesh:
        """A new mesh with the given panels halved in parameter (corner-zone panels are kept whole)."""
        marked = np.zeros(self.n_panels, dtype=bool)
        marked[list(panels)] = True
        if self.corner_zones:
            marked[self.zone_panels()] = False
        new_index = np.cumsum(np.concatenate([[0], 1 + marked[:-1].astype(np.int64)]))
        seg, t0, t1, cont, corner = [], [], [], [], []
        for i in range(self.n_panels):
            a, b = self.t0[i], self.t1[i]
            pieces = [(a, 0.5 * (a + b)), (0.5 * (a + b), b)] if marked[i] else [(a, b)]
            for n, (lo, hi) in enumerate(pieces):
                seg.append(self.seg_of_panel[i])
                t0.append(lo)
                t1.append(hi)
                cont.append(self.contour_of_panel[i])
                corner.append(bool(self.corner_at_start[i]) and n == 0)
        return PanelMesh(
            self.p,
            self.segments,
            np.array(seg),
            np.array(t0),
            np.array(t1),
            np.array(cont),
            self.body_of_contour,
            np.array(corner),
            tuple(z.renumbered(new_index) for z in self.corner_zones),
        )


def transmission_exponent(interior_angle: float, flux_ratio: complex) -> float:
    """Smallest exponent ``nu > 0`` of ``u ~ r^nu`` at a corner between two media (see ``_exponent``).

    Cached: the mesher asks once per corner and refinement level.
    """
    return _exponent(round(float(interior_angle), 12), round(float(np.real(flux_ratio)), 12))


@lru_cache(maxsize=256)
def _exponent(interior_angle: float, flux_ratio: float) -> float:
    """Smallest exponent ``nu > 0`` of ``u ~ r^nu`` at a corner between two media.

    With ``u = r^nu f(phi)`` in the wedge of angle ``theta`` (coefficient
    ``beta_in``) and outside it (``beta_out``), continuity of ``u`` and
    ``beta du/dphi`` gives, for the even and odd parts,
    ``beta_in tan(nu theta/2) + beta_out tan(nu (pi - theta/2)) = 0`` and
    ``beta_in cot(nu theta/2) + beta_out cot(nu (pi - theta/2)) = 0``
    (the dielectric-wedge analysis of Meixner, IEEE Trans. AP-20, 1972,
    from memory; derived again here). Equal media give ``nu = 1`` (smooth).
    """
    b_in, b_out = 1.0, flux_ratio
    half = 0.5 * interior_angle
    nu = np.linspace(1e-4, 1.0, 20001)
    best = 1.0
    for fn in (
        lambda v: b_in * np.sin(v * half) * np.cos(v * (np.pi - half)) + b_out * np.sin(v * (np.pi - half)) * np.cos(v * half),
        lambda v: b_in * np.cos(v * half) * np.sin(v * (np.pi - half)) + b_out * np.cos(v * (np.pi - half)) * np.sin(v * half),
    ):
        vals = fn(nu)
        flips = np.flatnonzero(np.sign(vals[:-1]) * np.sign(vals[1:]) < 0)
        if flips.size:
            best = min(best, float(nu[flips[0] + 1]))
    return best


def _corner_levels(
    mesh: PanelMesh, panel: int, prev: IntArray, cap: int, tolerance: float,
    flux_ratio: complex | None = None,
) -> int:
    """Dyadic levels the corner at the start of ``panel`` needs.

    Near a corner whose exterior (field-side) angle is ``alpha`` the fields
    behave like ``r^(pi/alpha)`` (Meixner's edge condition, from memory), so
    the innermost panel's share of the error falls like ``h^(pi/alpha)``:
    ``levels = 0.8 log2(1/tol) / (pi/alpha)``, calibrated on the square
    (``alpha = 3 pi / 2``). Integer exponents (re-entrant right angles and the
    like) give smooth fields and need only a few levels.
    """
    seg_in = mesh.segments[mesh.seg_of_panel[prev[panel]]]
    seg_out = mesh.segments[mesh.seg_of_panel[panel]]
    t_in = seg_in.tangent(mesh.t1[prev[panel]])[0]
    t_out = seg_out.tangent(mesh.t0[panel])[0]
    turn = math.atan2(t_in[0] * t_out[1] - t_in[1] * t_out[0], float(np.dot(t_in, t_out)))
    alpha = math.pi + turn  # exterior angle: a convex right-angle corner has 3 pi / 2
    if flux_ratio is None:
        nu = math.pi / max(alpha, 1e-3)
    else:
        nu = transmission_exponent(2 * math.pi - alpha, flux_ratio)
    if abs(nu - round(nu)) < 1e-3:
        return min(cap, 4)
    want = math.ceil(0.8 * math.log2(1.0 / tolerance) / nu)
    floor = 4 if tolerance < 1e-3 else 1
    return int(min(cap, MAX_CORNER_LEVELS, max(floor, want)))


def corner_levels_for(tolerance: float) -> int:
    """Upper bound on the dyadic levels toward any corner for a target tolerance.

    Each corner then takes what its angle needs (``_corner_levels``); the
    sharpest wedges need the most, about two levels per binary digit.
    """
    return int(min(MAX_CORNER_LEVELS, max(4, math.ceil(2.0 * math.log2(1.0 / tolerance)))))


@dataclass
class _Piece:
    seg: int
    t0: float
    t1: float
    contour: int
    corner: bool


def _piece_geometry(segment: Segment, a: float, b: float, p: int) -> tuple[float, float, float]:
    """Length, total turn and relative polynomial tail of the coordinates on a piece."""
    x, w = gauss_legendre(p)
    t = a + (b - a) * 0.5 * (x + 1.0)
    d = segment.derivative(t) * 0.5 * (b - a)
    speed = np.hypot(d[:, 0], d[:, 1])
    length = float(np.dot(w, speed))
    dd = segment.second_derivative(t) * (0.5 * (b - a)) ** 2
    curv = (d[:, 0] * dd[:, 1] - d[:, 1] * dd[:, 0]) / speed**3
    turn = float(np.dot(w, np.abs(curv) * speed))
    pts = segment.points(t)
    coef = legendre_analysis_matrix(p) @ pts
    # Coefficients at the rounding level of the coordinates are noise: halving
    # cannot lower them (relative to the length it raises them, without end).
    tail = float(np.max(np.abs(coef[-3:])))
    noise = ROUNDING_TAIL * np.finfo(float).eps * float(np.max(np.abs(pts)))
    tail = 0.0 if tail <= noise else tail / max(length, 1e-300)
    # A parametrisation whose speed varies a lot is hard to interpolate too.
    tail = max(tail, float(np.max(np.abs(legendre_analysis_matrix(p) @ speed)[-3:])) / max(speed.mean(), 1e-300))
    return length, turn, tail


def _equal_pieces(segment: Segment, piece: _Piece, hmax: float) -> list[_Piece]:
    """``piece`` cut into the fewest pieces of equal arc length no longer than ``hmax``.

    Halving alone would overshoot the wavelength rule by up to a factor two
    (a quarter circle of 12.5 wavelengths would get 16 panels, not 13).
    """
    a, b = piece.t0, piece.t1
    x, w = gauss_legendre(16)
    edges = np.linspace(a, b, _ARC_CELLS + 1)
    half = 0.5 * (edges[1:] - edges[:-1])
    t = edges[:-1, None] + half[:, None] * (x[None, :] + 1.0)
    speed = np.hypot(*segment.derivative(t.ravel()).T).reshape(t.shape)
    arc = np.concatenate([[0.0], np.cumsum((speed * w).sum(axis=1) * half)])
    n = math.ceil(arc[-1] / hmax - 1e-9) if hmax > 0 else 1
    if n > MAX_PANELS:
        raise GeometryError(f"the mesh would need more than {MAX_PANELS} panels; check units")
    if n <= 1 or not np.all(np.diff(arc) > 0):
        return [piece]
    cuts = np.interp(np.linspace(0.0, arc[-1], n + 1)[1:-1], arc, edges)
    ts = [a, *cuts.tolist(), b]
    return [
        _Piece(piece.seg, float(lo), float(hi), piece.contour, piece.corner and i == 0)
        for i, (lo, hi) in enumerate(zip(ts[:-1], ts[1:]))
    ]


def build_panels(
    boundaries: Sequence[BoundaryContour],
    *,
    p: int = 16,
    tolerance: float = 1e-8,
    max_panel_wavelengths: float = 1.0,
    corner_levels: int | None = None,
    corner_tolerance: float | None = None,
) -> PanelMesh:
    """Mesh closed contours into panels sized for the wavelength and geometry.

    Parameters
    ----------
    boundaries
        Contours with their body index and limiting wavelength (metres).
    p
        Gauss-Legendre nodes per panel.
    tolerance
        Relative accuracy target; it sets the geometric resolution and the
        depth of corner refinement.
    max_panel_wavelengths
        Longest panel, in wavelengths.
    corner_levels
        Dyadic levels toward corners; default from ``corner_levels_for``.
    corner_tolerance
        Tolerance that sets the depth of corner refinement (default
        ``tolerance``); a looser one trades accuracy for unknowns.

    Returns
    -------
    PanelMesh

    Raises
    ------
    GeometryError
        If a contour is degenerate or the mesh would exceed ``MAX_PANELS``.
    """
    if not boundaries:
        raise GeometryError("nothing to mesh: the scene has no boundary")
    corner_tol = tolerance if corner_tolerance is None else corner_tolerance
    ratios = [b.flux_ratio for b in boundaries]
    levels = corner_levels_for(corner_tol) if corner_levels is None else int(corner_levels)
    geo_tol = max(1e-14, 0.01 * tolerance)
    segments: list[Segment] = []
    contours: list[list[_Piece]] = []
    hmax: list[float] = []
    for ci, b in enumerate(boundaries):
        pieces: list[_Piece] = []
        flags = b.contour.corner_flags()
        for si, seg in enumerate(b.contour.segments):
            idx = len(segments)
            segments.append(seg)
            hints = seg.subdivision_hints()
            for n, (a, c) in enumerate(zip(hints[:-1], hints[1:])):
                pieces.append(_Piece(idx, float(a), float(c), ci, bool(flags[si]) and n == 0))
        contours.append(pieces)
        hmax.append(max_panel_wavelengths * b.wavelength_m)

    # 1. Wavelength (equal pieces), turning and geometric resolution (halving).
    for ci, pieces in enumerate(contours):
        out: list[_Piece] = []
        stack = list(reversed([q for pc in pieces for q in _equal_pieces(segments[pc.seg], pc, hmax[ci])]))
        while stack:
            pc = stack.pop()
            length, turn, tail = _piece_geometry(segments[pc.seg], pc.t0, pc.t1, p)
            if length <= 0.0:
                raise GeometryError(f"contour {ci} has a zero-length piece")
            if (length > LENGTH_SLACK * hmax[ci] or turn > MAX_TURN_RAD or tail > geo_tol) and (
                pc.t1 - pc.t0
            ) > 1e-12:
                mid = 0.5 * (pc.t0 + pc.t1)
                stack.append(_Piece(pc.seg, mid, pc.t1, ci, False))
                stack.append(_Piece(pc.seg, pc.t0, mid, ci, pc.corner))
            else:
                out.append(pc)
            if len(out) > MAX_PANELS:
                raise GeometryError(
                    f"the mesh would need more than {MAX_PANELS} panels to follow the geometry to the "
                    f"tolerance {tolerance:.0e} with {p} nodes per panel; loosen the tolerance or raise nodes_per_panel"
                )
        contours[ci] = out

    mesh = _to_mesh(p, segments, contours, boundaries)
    # 2. Thin gaps and close bodies; 3. neighbour ratio; repeated to a fixed point.
    for _ in range(20):
        marked = set(_gap_violations(mesh)) | set(_ratio_violations(mesh))
        if not marked:
            break
        mesh = mesh.split(sorted(marked))
    # 4. Dyadic refinement toward corners, as deep as each corner's angle needs.
    for level in range(MAX_CORNER_LEVELS):
        prev, nxt = mesh.neighbours()
        corner_pan = np.flatnonzero(mesh.corner_at_start)
        if corner_levels is None:
            need = np.array([
                _corner_levels(mesh, int(i), prev, levels, corner_tol, ratios[int(mesh.contour_of_panel[i])])
                for i in corner_pan
            ], dtype=int)
        else:
            need = np.full(corner_pan.size, min(levels, MAX_CORNER_LEVELS))
        corner_pan = corner_pan[need > level]
        touching = set(corner_pan.tolist()) | set(prev[corner_pan].tolist())
        if not touching:
            break
        mesh = mesh.split(sorted(touching))
    return regrade(mesh)


def regrade(mesh: PanelMesh, *, passes: int = 200) -> PanelMesh:
    """Split panels until no panel is more than twice as long as a neighbour."""
    for _ in range(passes):
        marked = _ratio_violations(mesh)
        if not marked:
            break
        mesh = mesh.split(marked)
    return mesh


def _to_mesh(
    p: int,
    segments: list[Segment],
    contours: list[list[_Piece]],
    boundaries: Sequence[BoundaryContour],
) -> PanelMesh:
    flat = [pc for pieces in contours for pc in pieces]
    return PanelMesh(
        p,
        segments,
        np.array([pc.seg for pc in flat]),
        np.array([pc.t0 for pc in flat]),
        np.array([pc.t1 for pc in flat]),
        np.array([pc.contour for pc in flat]),
        np.array([b.body for b in boundaries]),
        np.array([pc.corner for pc in flat]),
    )


def _ratio_violations(mesh: PanelMesh) -> list[int]:
    prev, nxt = mesh.neighbours()
    lengths = mesh.lengths
    limit = 2.0 * RATIO_SLACK
    bad = (lengths > limit * lengths[prev]) | (lengths > limit * lengths[nxt])
    return np.flatnonzero(bad).tolist()


def _gap_violations(mesh: PanelMesh) -> list[int]:
    """Panels longer than GAP_RATIO times their distance to boundary far along the contour.

    Boundary counts as "far" when it belongs to another contour, or to the
    same contour but more than two panel lengths away along it: a thin slot
    or a narrow gap between bodies, not just the next panels of a smooth curve.
    """
    tree = cKDTree(mesh.nodes)
    p = mesh.p
    contour = mesh.contour_of_node
    # Arc-length position of every node and panel start along its contour.
    arc_node = np.empty(mesh.n_nodes)
    start = np.empty(mesh.n_panels)
    total = {}
    for c in np.unique(mesh.contour_of_panel):
        idx = np.flatnonzero(mesh.contour_of_panel == c)
        lens = mesh.lengths[idx]
        s0 = np.concatenate([[0.0], np.cumsum(lens)[:-1]])
        start[idx] = s0
        total[int(c)] = float(lens.sum())
        w = mesh.weights.reshape(mesh.n_panels, p)[idx]
        within = np.cumsum(w, axis=1) - 0.5 * w
        arc_node[(idx[:, None] * p + np.arange(p)).ravel()] = (s0[:, None] + within).ravel()
    bad: list[int] = []
    for i in range(mesh.n_panels):
        length = mesh.lengths[i]
        own = mesh.nodes[i * p : (i + 1) * p]
        hits = tree.query_ball_point(own, r=length / GAP_RATIO)
        c = int(mesh.contour_of_panel[i])
        a, b, loop = start[i], start[i] + length, total[c]
        own_normals = mesh.normals[i * p : (i + 1) * p]
        for row, nrm, near in zip(own, own_normals, hits):
            if not near:
                continue
            j = np.array(near)
            # Only boundary across the surrounding medium makes a gap: the far
            # face of a thin plate lies behind the surface, through the body,
            # and the near-panel product rule already integrates it exactly.
            ahead = (mesh.nodes[j] - row) @ nrm > 0.0
            j = j[ahead]
            if j.size == 0:
                continue
            same = contour[j] == c
            euclid = np.hypot(*(mesh.nodes[j] - row).T)
            s_j = arc_node[j]
            # circular distance from s_j to the interval [a, b]
            d = np.where((s_j >= a) & (s_j <= b), 0.0, np.minimum(np.abs(s_j - a), np.abs(s_j - b)))
            d = np.minimum(d, loop - np.maximum(np.abs(s_j - a), np.abs(s_j - b)))
            # Far along the contour and much farther along it than across:
            # a slot or a thin gap. The sides of a wedge near its tip are
            # close too, but there dyadic corner refinement does the work.
            if np.any(~same | ((d > 2.0 * length) & (d > SLOT_RATIO * euclid))):
                bad.append(i)
                break
    return bad
