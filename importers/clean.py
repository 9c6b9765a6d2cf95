"""Join the pieces of a drawing into oriented bodies, and say what was wrong.

Glossary
--------
gap tolerance
    End points closer than ``gap_tol_m`` are welded into one node. Lines
    are snapped onto the node (their end point moves); arcs and splines are
    never changed, so a gap between two curved ends is accepted as it is
    and recorded (the mesher sees it as a joint of that size).
ring
    A closed chain of pieces in which every node joins exactly two piece
    ends.
nesting
    Rings are nested by containment. A ring directly inside a body's outer
    ring on the same layer is a hole of that body; on another layer it is an
    *inclusion*, a body of its own inside the host (a different material,
    say), and the host keeps its outline. A ring directly inside a hole is an
    *island*, a body of its own.
orientation
    Outer rings run counter-clockwise and holes clockwise
    (:class:`~sectionwave.importers.curves.Body` enforces it).
audit
    ``fixes`` (what was changed: ``gap-closed``, ``gap-accepted``,
    ``duplicate-removed``, ``zero-length-removed``, ``ring-reversed``) and
    ``errors`` (what stops a solve: ``open-chain``, ``branch``,
    ``self-intersection``, ``crossing``, ``contact``,
    ``hole-touches-outline``, ``near-contact``), each with a stable
    ``code``, a message naming layer, handles and coordinates, and a
    location in drawing coordinates (metres).

Topology is decided on shapely polygons sampled from the exact curves; the
bodies returned keep the exact curves.
"""

from __future__ import annotations

import logging
import math
import re
from collections import Counter, defaultdict
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .curves import Body, Contour, EllipticalArc, Line, Segment
from .drawing import Drawing, Piece
from .errors import GeometryError

__all__ = [
    "DEFAULT_GAP_TOL_REL",
    "Audit",
    "AuditItem",
    "CleanResult",
    "clean_drawing",
]

logger = logging.getLogger(__name__)

#: Default gap tolerance as a fraction of the drawing's bounding-box diagonal.
DEFAULT_GAP_TOL_REL = 1e-6

#: Welded gaps below this fraction of the gap tolerance are rounding, not recorded.
_GAP_NOISE_REL = 1e-3

#: Samples per full turn of an arc when building shapely polygons.
_SAMPLES_PER_TURN = 256

_POINT_RE = re.compile(r"\[\s*([-+0-9.eE]+)\s+([-+0-9.eE]+)")


@dataclass(frozen=True)
class AuditItem:
    """One fix or error found while cleaning.

    Attributes
    ----------
    code
        Stable identifier such as ``"open-chain"`` (see the module glossary).
    message
        One line for people: layer, handles, coordinates, what to do.
    location
        A point in drawing coordinates (metres), if the item has one.
    layer
        Layer of the pieces involved (first one when several).
    handles
        Entity handles or element ids involved.
    """

    code: str
    message: str
    location: tuple[float, float] | None = None
    layer: str = ""
    handles: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        """JSON-able form."""
        return {
            "code": self.code,
            "message": self.message,
            "location": None if self.location is None else list(self.location),
            "layer": self.layer,
            "handles": list(self.handles),
        }


@dataclass
class Audit:
    """What cleaning changed (``fixes``) and what it could not accept (``errors``)."""

    fixes: list[AuditItem] = field(default_factory=list)
    errors: list[AuditItem] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    def codes(self) -> Counter[str]:
        """How many items of each code, fixes and errors together."""
        return Counter(i.code for i in (*self.fixes, *self.errors))

    def to_dict(self) -> dict[str, Any]:
        """JSON-able form."""
        return {
            "notes": list(self.notes),
            "fixes": [i.to_dict() for i in self.fixes],
            "errors": [i.to_dict() for i in self.errors],
        }


@dataclass
class CleanResult:
    """Bodies made from a drawing, with their layers, nesting and the audit.

    Attributes
    ----------
    bodies
        Oriented bodies with exact curves, largest first.
    layers
        Layer of each body's outer ring.
    kinds
        ``"body"``, ``"island"`` (inside a hole) or ``"inclusion"`` (inside
        another layer's body) for each body.
    parents
        Index of the enclosing body (the host of an inclusion, the body
        whose hole holds an island), ``None`` at the top level.
    audit
        Fixes and errors.
    gap_tol_m
        Weld tolerance used.
    """

    bodies: list[Body]
    layers: list[str]
    kinds: list[str]
    parents: list[int | None]
    audit: Audit
    gap_tol_m: float

    @property
    def is_ok(self) -> bool:
        """True when the audit holds no error."""
        return not self.audit.errors

    def raise_for_errors(self) -> None:
        """Raise ``GeometryError`` listing the audit's errors, if any."""
        if self.audit.errors:
            lines = "; ".join(f"[{e.code}] {e.message}" for e in self.audit.errors[:5])
            more = len(self.audit.errors) - 5
            raise GeometryError(
                f"the drawing does not form clean bodies ({len(self.audit.errors)} error(s)): "
                f"{lines}{f'; and {more} more' if more > 0 else ''}"
            )


# --------------------------------------------------------------------------- helpers


def _fmt(p: Sequence[float] | NDArray[np.float64]) -> str:
    return f"({float(p[0]):.9g}, {float(p[1]):.9g})"


def _midpoint(seg: Segment) -> np.ndarray:
    if isinstance(seg, Line):
        return 0.5 * (seg.p0 + seg.p1)
    return seg.points(0.5)[0]


def _same_curve(a: Segment, b: Segment, tol: float) -> bool:
    """Whether two segments trace the same curve (either direction)."""
    if isinstance(a, Line) != isinstance(b, Line):
        return False
    t = np.array([0.0, 0.25, 0.5, 0.75, 1.0])
    pa = a.points(t)
    pb = b.points(t)
    if np.all(np.hypot(*(pa - pb).T) <= tol):
        return True
    return bool(np.all(np.hypot(*(pa - pb[::-1]).T) <= tol))


def _sample(seg: Segment) -> np.ndarray:
    """Points of a segment from its start, end excluded (for shapely)."""
    if isinstance(seg, Line):
        return seg.p0[None, :]
    if isinstance(seg, EllipticalArc):
        n = max(4, math.ceil(abs(seg.sweep) / (2 * math.pi) * _SAMPLES_PER_TURN))
    else:
        n = 16 * max(1, len(seg.subdivision_hints()) - 1)
    return seg.points(np.linspace(0.0, 1.0, n, endpoint=False))


class _Ring:
    def __init__(self, contour: Contour, pieces: list[Piece], drawn_ccw: bool) -> None:
        from shapely.geometry import LinearRing, Polygon

        self.contour = contour
        self.pieces = pieces
        self.drawn_ccw = drawn_ccw
        layers = Counter(p.layer for p in pieces)
        self.layer = layers.most_common(1)[0][0]
        pts = np.vstack([_sample(s) for s in contour.segments])
        self.area = abs(contour.signed_area())
        self.ring = LinearRing(pts) if len(pts) >= 3 else None
        self.poly = Polygon(pts) if len(pts) >= 3 else None

    @property
    def handles(self) -> tuple[str, ...]:
        return tuple(dict.fromkeys(p.handle for p in self.pieces if p.handle))

    def describe(self) -> str:
        hs = self.handles
        shown = ", ".join(hs[:4]) + (f" and {len(hs) - 4} more" if len(hs) > 4 else "")
        return f"ring on layer {self.layer!r} ({len(self.pieces)} pieces: {shown or 'no ids'})"


# --------------------------------------------------------------------------- main


def clean_drawing(  # noqa: C901 - one pass per cleaning stage, each reported in the audit
    drawing: Drawing | Sequence[Piece],
    *,
    gap_tol_m: float | None = None,
    gap_tol_rel: float = DEFAULT_GAP_TOL_REL,
    clearance_m: float | None = None,
) -> CleanResult:
    """Weld, chain, check and nest the pieces of a drawing into bodies.

    Parameters
    ----------
    drawing
        A :class:`Drawing` or a sequence of pieces (metres).
    gap_tol_m
        End points closer than this are welded. By default ``gap_tol_rel``
        times the bounding-box diagonal.
    gap_tol_rel
        Relative default of ``gap_tol_m``.
    clearance_m
        When given, pairs of rings closer than this (without touching) are
        reported as ``near-contact`` errors: thin gaps need fine meshes.

    Returns
    -------
    CleanResult
        Bodies (exact curves, outer CCW, holes CW) and the audit. Rings
        with errors are left out of the bodies; check ``result.is_ok`` or
        call ``result.raise_for_errors()``.

    Raises
    ------
    GeometryError
        If there is nothing to clean or a tolerance is not positive.

    Examples
    --------
    >>> from sectionwave.importers.curves import Line
    >>> sq = [(0, 0), (1, 0), (1, 1), (0, 1)]
    >>> pieces = [Piece(Line(sq[i], sq[(i + 1) % 4])) for i in range(4)]
    >>> res = clean_drawing(pieces)
    >>> res.is_ok, round(res.bodies[0].area(), 12)
    (True, 1.0)
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components
    from scipy.spatial import cKDTree

    if isinstance(drawing, Drawing):
        pieces = list(drawing.pieces)
        audit = Audit(notes=list(drawing.notes))
        where = drawing.name
    else:
        pieces = list(drawing)
        audit = Audit()
        where = "(pieces)"
    if not pieces:
        raise GeometryError(f"{where}: nothing to clean: the drawing holds no pieces")

    n = len(pieces)
    starts = np.array([p.segment.start for p in pieces])
    ends = np.array([p.segment.end for p in pieces])
    mids = np.array([_midpoint(p.segment) for p in pieces])
    allp = np.vstack([starts, ends, mids])
    diag = float(np.hypot(*(allp.max(axis=0) - allp.min(axis=0))))
    if gap_tol_m is None:
        gap_tol_m = gap_tol_rel * diag if diag > 0 else 1e-12
    if not gap_tol_m > 0:
        raise GeometryError(f"{where}: the gap tolerance must be positive, got {gap_tol_m!r}")
    tol = float(gap_tol_m)
    noise = _GAP_NOISE_REL * tol

    # 1. zero-length pieces ---------------------------------------------------
    keep = np.ones(n, dtype=bool)
    chord = np.hypot(*(ends - starts).T)
    for i in np.flatnonzero(chord <= tol).tolist():
        seg = pieces[i].segment
        if isinstance(seg, Line) or seg.length() <= tol:
            keep[i] = False
            pc = pieces[i]
            audit.fixes.append(AuditItem(
                "zero-length-removed",
                f"{pc.source or pc.segment.kind} on layer {pc.layer!r} at {_fmt(starts[i])} "
                f"is shorter than the gap tolerance {tol:.3g} m: removed",
                (float(starts[i][0]), float(starts[i][1])), pc.layer, (pc.handle,),
            ))

    # 2. exact duplicates -------------------------------------------------------
    idx = np.flatnonzero(keep)
    if len(idx) > 1:
        tree = cKDTree(mids[idx])
        for a, b in sorted(tree.query_pairs(tol)):
            i, j = int(idx[a]), int(idx[b])
            if keep[i] and keep[j] and _same_curve(pieces[i].segment, pieces[j].segment, tol):
                keep[j] = False
                pj, pi = pieces[j], pieces[i]
                audit.fixes.append(AuditItem(
                    "duplicate-removed",
                    f"{pj.source or pj.segment.kind} on layer {pj.layer!r} repeats "
                    f"{pi.source or pi.segment.kind} (through {_fmt(mids[j])}): removed",
                    (float(mids[j][0]), float(mids[j][1])), pj.layer, (pj.handle, pi.handle),
                ))
    idx = np.flatnonzero(keep)
    work = [pieces[i] for i in idx.tolist()]
    m = len(work)
    if m == 0:
        raise GeometryError(f"{where}: nothing left to clean after removing empty pieces")

    # 3. weld end points (KD-tree pairs, then connected components = union-find)
    ends_all = np.vstack([starts[idx], ends[idx]])  # end k of piece i: k*m + i
    tree = cKDTree(ends_all)
    pairs = tree.query_pairs(tol, output_type="ndarray")
    graph = coo_matrix(
        (np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])) if len(pairs) else ([], ([], [])),
        shape=(2 * m, 2 * m),
    )
    n_nodes, label = connected_components(graph, directed=False)
    node_start, node_end = label[:m], label[m:]
    is_line = np.array([isinstance(p.segment, Line) for p in work] * 2)
    rep = np.full((n_nodes, 2), np.nan)
    # Prefer a curved end as the node position: curves cannot be moved.
    for k in np.flatnonzero(~is_line).tolist():
        if np.isnan(rep[label[k], 0]):
            rep[label[k]] = ends_all[k]
    for k in np.flatnonzero(is_line).tolist():
        if np.isnan(rep[label[k], 0]):
            rep[label[k]] = ends_all[k]
    spread = np.hypot(*(ends_all - rep[label]).T)
    members: dict[int, list[int]] = defaultdict(list)
    for k in np.flatnonzero(spread > noise).tolist():
        members[int(label[k])].append(k)
    for v in members:
        all_k = np.flatnonzero(label == v)
        gap = float(spread[all_k].max())
        curved = [k for k in all_k if not is_line[k]]
        hs = tuple(dict.fromkeys(work[k % m].handle for k in all_k))
        code = "gap-accepted" if len(curved) > 1 else "gap-closed"
        what = ("curved ends left as drawn (a joint of that size remains)"
                if code == "gap-accepted" else "line end snapped")
        audit.fixes.append(AuditItem(
            code,
            f"gap of {gap:.3g} m at {_fmt(rep[v])} on layer {work[all_k[0] % m].layer!r} "
            f"between {', '.join(h or '?' for h in hs)} closed (tolerance {tol:.3g} m): {what}",
            (float(rep[v][0]), float(rep[v][1])), work[all_k[0] % m].layer, hs,
        ))

    # snapped segments; a line whose two ends weld together vanishes
    segs: list[Segment | None] = []
    for i, pc in enumerate(work):
        seg = pc.segment
        a, b = int(node_start[i]), int(node_end[i])
        if isinstance(seg, Line):
            if a == b:
                segs.append(None)
                audit.fixes.append(AuditItem(
                    "zero-length-removed",
                    f"{pc.source or 'line'} on layer {pc.layer!r} collapses to the point "
                    f"{_fmt(rep[a])} once its ends are welded: removed",
                    (float(rep[a][0]), float(rep[a][1])), pc.layer, (pc.handle,),
                ))
                continue
            if not (np.array_equal(seg.p0, rep[a]) and np.array_equal(seg.p1, rep[b])):
                seg = Line(rep[a], rep[b])
        segs.append(seg)

    # 4. graph: nodes and piece ends ---------------------------------------------
    incid: dict[int, list[tuple[int, int]]] = defaultdict(list)
    for i, maybe in enumerate(segs):
        if maybe is None:
            continue
        incid[int(node_start[i])].append((i, 0))
        incid[int(node_end[i])].append((i, 1))
    live = [i for i, s in enumerate(segs) if s is not None]
    if not live:
        raise GeometryError(f"{where}: nothing left to clean after welding")
    eg = coo_matrix(
        (np.ones(len(live)), (node_start[live], node_end[live])), shape=(n_nodes, n_nodes)
    )
    _, comp = connected_components(eg, directed=False)
    by_comp: dict[int, list[int]] = defaultdict(list)
    for i in live:
        by_comp[int(comp[node_start[i]])].append(i)

    loose = [v for v, inc in incid.items() if len(inc) == 1]
    loose_tree = cKDTree(rep[loose]) if len(loose) > 1 else None

    def loose_text(v: int) -> str:
        (i, _side), = incid[v]
        pc = work[i]
        txt = f"{_fmt(rep[v])} ({pc.source or pc.segment.kind}, layer {pc.layer!r})"
        if loose_tree is not None:
            d, j = loose_tree.query(rep[v], k=2)
            other = loose[int(j[1])]
            txt += f", nearest other loose end {d[1]:.3g} m away at {_fmt(rep[other])}"
        return txt

    rings: list[_Ring] = []
    for _c, members_i in sorted(by_comp.items(), key=lambda kv: kv[1][0]):
        nodes = {int(node_start[i]) for i in members_i} | {int(node_end[i]) for i in members_i}
        degs = {v: len(incid[v]) for v in nodes}
        if all(d == 2 for d in degs.values()):
            rings.append(_walk_ring(members_i[0], segs, work, incid, node_start, node_end))
            continue
        ends_v = sorted(v for v, d in degs.items() if d == 1)
        branches = sorted(v for v, d in degs.items() if d > 2)
        hs = tuple(dict.fromkeys(work[i].handle for i in members_i))
        layer = work[members_i[0]].layer
        if ends_v:
            desc = "; ".join(loose_text(v) for v in ends_v[:4])
            more = f" and {len(ends_v) - 4} more loose ends" if len(ends_v) > 4 else ""
            audit.errors.append(AuditItem(
                "open-chain",
                f"open chain of {len(members_i)} piece(s) on layer {layer!r}, loose ends at "
                f"{desc}{more}; close the outline or raise the gap tolerance "
                f"(now {tol:.3g} m)",
                (float(rep[ends_v[0]][0]), float(rep[ends_v[0]][1])), layer, hs,
            ))
        for v in branches:
            here = tuple(dict.fromkeys(work[i].handle for i, _ in incid[v]))
            audit.errors.append(AuditItem(
                "branch",
                f"{degs[v]} piece ends meet at {_fmt(rep[v])} on layer {layer!r} "
                f"({', '.join(h or '?' for h in here)}); an outline may join only two: "
                f"remove stray or overlapping pieces, or move apart outlines that touch "
                f"at this point",
                (float(rep[v][0]), float(rep[v][1])), layer, here,
            ))

    return _nest(rings, audit, tol, clearance_m)


def _walk_ring(
    first: int, segs: list[Segment | None], work: list[Piece],
    incid: dict[int, list[tuple[int, int]]], node_start: np.ndarray, node_end: np.ndarray,
) -> _Ring:
    """Follow a cycle from piece ``first`` in its drawn direction."""
    order: list[Segment] = []
    used: list[Piece] = []
    forward = 0  # signed count of pieces walked as drawn minus reversed (length-weighted)
    i: int = first
    side_in = 0  # enter piece i at its start
    while True:
        seg = segs[i]
        assert seg is not None
        if side_in == 0:
            order.append(seg)
            forward += 1
            v = int(node_end[i])
            arrived = (i, 1)
        else:
            order.append(seg.reversed())
            forward -= 1
            v = int(node_start[i])
            arrived = (i, 0)
        used.append(work[i])
        a, b = incid[v]
        nxt = b if a == arrived else a
        i, side_in = nxt
        if i == first and side_in == 0:
            break
    contour = Contour(tuple(order), source="")
    ccw = contour.signed_area() > 0
    # The ring "as drawn": the direction most of its pieces were drawn in.
    drawn_ccw = ccw if forward >= 0 else not ccw
    layer = Counter(p.layer for p in used).most_common(1)[0][0]
    hs = list(dict.fromkeys(p.handle for p in used if p.handle))
    src = f"layer {layer}: {', '.join(hs[:6])}{' ...' if len(hs) > 6 else ''}"
    return _Ring(Contour(contour.segments, source=src), used, drawn_ccw)


def _nest(  # noqa: C901 - nesting, validity and clearance checks share one ring loop
    rings: list[_Ring], audit: Audit, tol: float, clearance_m: float | None
) -> CleanResult:
    import shapely
    from shapely.strtree import STRtree

    # 5. self-intersections ------------------------------------------------------
    valid: list[_Ring] = []
    for r in rings:
        # A ring whose pieces run back along each other has no inside: say so
        # before shapely calls it a self-intersection.
        per = r.contour.perimeter()
        hull = 0.0 if r.poly is None else float(r.poly.convex_hull.area)
        if hull <= 1e-12 * per * per:
            p0 = r.contour.segments[0].start
            audit.errors.append(AuditItem(
                "self-intersection",
                f"{r.describe()} through {_fmt(p0)} encloses no area (its pieces run back "
                f"along each other); remove it or redraw the outline",
                (float(p0[0]), float(p0[1])), r.layer, r.handles,
            ))
            continue
        reason = "too few points" if r.poly is None else shapely.is_valid_reason(r.poly)
        if reason != "Valid Geometry":
            mt = _POINT_RE.search(reason)
            loc = (float(mt.group(1)), float(mt.group(2))) if mt else None
            audit.errors.append(AuditItem(
                "self-intersection",
                f"{r.describe()} crosses itself at {_fmt(loc) if loc else '?'} ({reason}); "
                f"redraw the outline so it does not cross",
                loc, r.layer, r.handles,
            ))
            continue
        if r.area <= 0.0:
            audit.errors.append(AuditItem(
                "self-intersection", f"{r.describe()} encloses no area; remove it",
                None, r.layer, r.handles,
            ))
            continue
        valid.append(r)
    valid.sort(key=lambda r: -r.area)
    if not valid:
        return CleanResult([], [], [], [], audit, tol)

    # 6. contacts and crossings between rings ----------------------------------------
    lines = [r.ring for r in valid]
    tree = STRtree(lines)
    bad: set[int] = set()
    touching: list[tuple[int, int, tuple[float, float]]] = []
    qa, qb = tree.query(lines, predicate="intersects")
    for a, b in zip(qa.tolist(), qb.tolist(), strict=True):
        if a >= b:
            continue
        ra, rb = valid[a], valid[b]
        inter = ra.ring.intersection(rb.ring)
        pts = shapely.get_coordinates(inter)
        loc = (float(pts[0][0]), float(pts[0][1])) if len(pts) else None
        overlap = ra.poly.intersection(rb.poly).area
        small = min(ra.area, rb.area)
        if overlap <= 1e-9 * small:
            audit.errors.append(AuditItem(
                "contact",
                f"{ra.describe()} and {rb.describe()} touch at {_fmt(loc) if loc else '?'}; "
                f"bodies must be apart (or merged into one outline)",
                loc, ra.layer, ra.handles + rb.handles,
            ))
        elif overlap >= (1 - 1e-6) * small:
            touching.append((a, b, loc if loc else (math.nan, math.nan)))
        else:
            bad.update((a, b))
            audit.errors.append(AuditItem(
                "crossing",
                f"{ra.describe()} and {rb.describe()} cross at {_fmt(loc) if loc else '?'}: "
                f"the bodies overlap; merge or separate them",
                loc, ra.layer, ra.handles + rb.handles,
            ))

    # 7. nesting (largest first, so a parent is placed before its children) ------
    polys = [r.poly for r in valid]
    ptree = STRtree(polys)
    parent_ring: list[int | None] = [None] * len(valid)
    ia, ib = ptree.query(polys, predicate="within")
    containers: dict[int, list[int]] = defaultdict(list)
    for a, b in zip(ia.tolist(), ib.tolist(), strict=True):
        if a != b and valid[b].area > valid[a].area:
            containers[a].append(b)
    for a, cs in containers.items():
        parent_ring[a] = min(cs, key=lambda c: valid[c].area)

    role: list[str] = [""] * len(valid)  # "outer" or "hole"
    body_of: list[int] = [-1] * len(valid)
    outers: list[int] = []
    kinds: list[str] = []
    parents: list[int | None] = []
    holes: dict[int, list[int]] = defaultdict(list)
    for i, r in enumerate(valid):
        if i in bad:
            continue
        p = parent_ring[i]
        while p is not None and p in bad:
            p = parent_ring[p]
        if p is None:
            role[i], kind, parent_body = "outer", "body", None
        elif role[p] == "outer" and valid[p].layer == r.layer:
            role[i] = "hole"
            body_of[i] = body_of[p]
            holes[body_of[p]].append(i)
            continue
        elif role[p] == "outer":
            role[i], kind, parent_body = "outer", "inclusion", body_of[p]
        else:
            role[i], kind, parent_body = "outer", "island", body_of[p]
        body_of[i] = len(outers)
        outers.append(i)
        kinds.append(kind)
        parents.append(parent_body)

    for a, b, loc in touching:
        if a in bad or b in bad:
            continue
        outer, inner = (a, b) if valid[a].area >= valid[b].area else (b, a)
        if role[inner] == "hole" and body_of[inner] == body_of[outer]:
            code, what = "hole-touches-outline", "the hole touches its body's outline"
        else:
            code, what = "contact", "a body touches the ring around it"
        audit.errors.append(AuditItem(
            code,
            f"{valid[inner].describe()} touches {valid[outer].describe()} at {_fmt(loc)}: "
            f"{what}; move it inside so they are apart",
            loc, valid[inner].layer, valid[inner].handles + valid[outer].handles,
        ))

    # 8. thin gaps ---------------------------------------------------------------------
    if clearance_m is not None and clearance_m > 0:
        qa, qb = tree.query(lines, predicate="dwithin", distance=clearance_m)
        for a, b in zip(qa.tolist(), qb.tolist(), strict=True):
            if a >= b:
                continue
            d = float(lines[a].distance(lines[b]))
            if d == 0.0:
                continue
            seg = shapely.shortest_line(lines[a], lines[b])
            p = shapely.get_coordinates(seg)[0]
            audit.errors.append(AuditItem(
                "near-contact",
                f"{valid[a].describe()} and {valid[b].describe()} come within {d:.3g} m of "
                f"each other near {_fmt(p)}, less than the clearance {clearance_m:.3g} m",
                (float(p[0]), float(p[1])), valid[a].layer, valid[a].handles + valid[b].handles,
            ))

    # 9. bodies -------------------------------------------------------------------------
    bodies: list[Body] = []
    layers: list[str] = []
    per_layer = Counter(valid[i].layer for i in outers)
    seen: Counter[str] = Counter()
    for k, i in enumerate(outers):
        r = valid[i]
        if r.drawn_ccw is not True:
            audit.fixes.append(_reversed_item(r, "an outer boundary", "counter-clockwise"))
        hole_contours = []
        for h in holes[k]:
            if valid[h].drawn_ccw:
                audit.fixes.append(_reversed_item(valid[h], "a hole", "clockwise"))
            hole_contours.append(valid[h].contour)
        seen[r.layer] += 1
        name = r.layer if per_layer[r.layer] == 1 else f"{r.layer}:{seen[r.layer]}"
        bodies.append(Body(r.contour, tuple(hole_contours), name))
        layers.append(r.layer)
    return CleanResult(bodies, layers, kinds, parents, audit, tol)


def _reversed_item(r: _Ring, role: str, way: str) -> AuditItem:
    start = r.contour.segments[0].start
    return AuditItem(
        "ring-reversed",
        f"{r.describe()} is drawn the wrong way for {role}: reversed to run {way}",
        (float(start[0]), float(start[1])), r.layer, r.handles,
    )
