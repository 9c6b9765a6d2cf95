"""Cleaning: welding, chaining, nesting, orientation and the audit.

Values are exact geometry (areas of squares and discs, crossing points of
straight edges worked out by hand).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from sectionwave.importers import GeometryError
from sectionwave.importers.clean import clean_drawing
from sectionwave.importers.curves import EllipticalArc, Line, circular_arc
from sectionwave.importers.drawing import Drawing, Piece

RTOL = 1e-12


def codes(items):
    return [i.code for i in items]


def test_square_with_hole_orientation_and_area(shapes):
    res = clean_drawing(shapes.square_with_hole())
    assert res.is_ok
    (body,) = res.bodies
    # exact geometry: 16 - 4
    assert body.area() == pytest.approx(12.0, rel=RTOL)
    assert body.outer.is_ccw and [h.is_ccw for h in body.holes] == [False]
    # the hole was drawn counter-clockwise: recorded as reversed
    assert codes(res.audit.fixes) == ["ring-reversed"]


def test_nesting_bodies_holes_islands(shapes):
    res = clean_drawing(shapes.nested_islands())
    assert res.is_ok
    assert res.kinds == ["body", "island"]
    assert res.parents == [None, 0]
    # exact geometry: 100 - 64 and 36 - 16
    assert [b.area() for b in res.bodies] == pytest.approx([36.0, 20.0], rel=RTOL)
    for body in res.bodies:
        assert body.outer.is_ccw
        assert all(not h.is_ccw for h in body.holes)


def test_inclusion_on_other_layer(shapes):
    pieces = shapes.square(0, 0, 4, layer="FOAM", tag="f") + shapes.circle(2, 2, 1, "METAL")
    res = clean_drawing(pieces)
    assert res.is_ok
    assert res.kinds == ["body", "inclusion"] and res.parents == [None, 0]
    assert res.layers == ["FOAM", "METAL"]
    assert [b.name for b in res.bodies] == ["FOAM", "METAL"]
    assert res.bodies[0].holes == ()
    # exact geometry: the disc keeps its exact area
    assert res.bodies[1].area() == pytest.approx(math.pi, rel=RTOL)


def test_names_for_several_bodies_on_a_layer(shapes):
    res = clean_drawing(shapes.square(0, 0, 2) + shapes.square(5, 0, 1))
    assert [b.name for b in res.bodies] == ["0:1", "0:2"]


def test_small_gap_is_closed(shapes):
    pieces = shapes.l_shape()
    p0 = pieces[0]
    a, b = p0.segment.p0, p0.segment.p1
    pieces[0] = Piece(Line(a, b + (0, 1e-9)), p0.layer, p0.handle, p0.source)
    res = clean_drawing(pieces, gap_tol_m=1e-7)
    assert res.is_ok
    (fix,) = [f for f in res.audit.fixes if f.code == "gap-closed"]
    assert fix.location == pytest.approx((2.0, 0.0))
    assert "l0" in fix.handles
    # exact geometry: the snapped L shape has area 3
    assert res.bodies[0].area() == pytest.approx(3.0, rel=RTOL)


def test_gap_above_tolerance_names_both_ends(shapes):
    pieces = shapes.l_shape()
    p0 = pieces[0]
    pieces[0] = Piece(Line(p0.segment.p0, (1.99, 0.0)), p0.layer, p0.handle, p0.source)
    res = clean_drawing(pieces, gap_tol_m=1e-6)
    assert not res.is_ok and not res.bodies
    (err,) = res.audit.errors
    assert err.code == "open-chain"
    assert "(1.99, 0)" in err.message and "(2, 0)" in err.message
    assert "LINE l0" in err.message and "LINE l1" in err.message
    assert "0.01 m away" in err.message
    with pytest.raises(GeometryError, match="open-chain"):
        res.raise_for_errors()
    # a tolerance above the gap closes it
    assert clean_drawing(pieces, gap_tol_m=0.02).is_ok


def test_default_tolerance_is_relative_to_size(shapes):
    res = clean_drawing(shapes.square(0, 0, 1000))
    # exact geometry: 1e-6 of the diagonal 1000 sqrt 2
    assert res.gap_tol_m == pytest.approx(1e-6 * 1000 * math.sqrt(2), rel=1e-12)


def test_curved_gap_is_accepted_and_arcs_stay_exact():
    r = 1.0
    top = circular_arc((0, 0), r, 0.0, math.pi)
    bottom = circular_arc((0, 0), r, math.pi + 1e-10, math.pi - 1e-10)
    res = clean_drawing([Piece(top, "0", "a"), Piece(bottom, "0", "b")], gap_tol_m=1e-8)
    assert res.is_ok
    assert "gap-accepted" in codes(res.audit.fixes)
    segs = res.bodies[0].outer.segments
    assert all(isinstance(s, EllipticalArc) for s in segs)
    # exact geometry: pi r^2, to the size of the accepted gap
    assert res.bodies[0].area() == pytest.approx(math.pi, rel=1e-9)


def test_crossing_names_the_point(shapes):
    res = clean_drawing(shapes.square(0, 0, 2, tag="a") + shapes.square(1, 1, 2, tag="b"))
    (err,) = res.audit.errors
    assert err.code == "crossing"
    # exact geometry: the edges x = 2 and y = 1 meet at (2, 1); y = 2 and x = 1 at (1, 2)
    assert min(math.dist(err.location, p) for p in [(2, 1), (1, 2)]) < 1e-12
    assert "cross at" in err.message


def test_self_intersection_names_the_point(shapes):
    res = clean_drawing(shapes.polygon([(0, 0), (2, 2), (2, 0), (0, 2)], tag="bow"))
    (err,) = res.audit.errors
    assert err.code == "self-intersection"
    # exact geometry: the diagonals of the bow tie cross at (1, 1)
    assert err.location == pytest.approx((1.0, 1.0), abs=1e-12)


def test_hole_touching_outline(shapes):
    outer = shapes.square(0, 0, 4, tag="o")
    diamond = shapes.polygon([(0, 2), (1, 1), (2, 2), (1, 3)], tag="d")  # vertex on x = 0
    res = clean_drawing(outer + diamond)
    assert codes(res.audit.errors) == ["hole-touches-outline"]
    assert res.audit.errors[0].location == pytest.approx((0.0, 2.0), abs=1e-12)


def test_bodies_touching(shapes):
    # a vertex of the triangle on the square's edge x = 1
    res = clean_drawing(shapes.square(0, 0, 1, tag="a") + shapes.polygon(
        [(1, 0.5), (2, 0), (2, 1)], tag="t"))
    assert codes(res.audit.errors) == ["contact"]
    assert res.audit.errors[0].location == pytest.approx((1.0, 0.5), abs=1e-12)
    # sharing a corner makes four piece ends meet at one node
    res = clean_drawing(shapes.square(0, 0, 1, tag="a") + shapes.polygon(
        [(1, 1), (2, 1), (2, 2)], tag="t"))
    assert codes(res.audit.errors) == ["branch"]
    assert res.audit.errors[0].location == pytest.approx((1.0, 1.0))


def test_near_contact(shapes):
    res = clean_drawing(shapes.thin_gap(1e-3), clearance_m=1e-2)
    (err,) = res.audit.errors
    assert err.code == "near-contact" and "within 0.001 m" in err.message
    assert clean_drawing(shapes.thin_gap(1e-3), clearance_m=1e-4).is_ok


def test_duplicates_and_zero_length_removed(shapes):
    pieces = shapes.square(0, 0, 1)
    pieces.append(Piece(pieces[0].segment.reversed(), "0", "dup"))
    pieces.append(Piece(Line((0.5, 0.5), (0.5, 0.5 + 1e-12)), "0", "tiny"))
    res = clean_drawing(pieces)
    assert res.is_ok
    c = res.audit.codes()
    assert c["duplicate-removed"] == 1 and c["zero-length-removed"] == 1
    assert res.bodies[0].area() == pytest.approx(1.0, rel=RTOL)


def test_branch_reported(shapes):
    pieces = shapes.square(0, 0, 1) + [Piece(Line((1, 0), (2, 0)), "0", "stray")]
    res = clean_drawing(pieces)
    assert set(codes(res.audit.errors)) == {"open-chain", "branch"}
    branch = next(e for e in res.audit.errors if e.code == "branch")
    assert branch.location == pytest.approx((1.0, 0.0))
    assert "stray" in branch.handles


def test_every_ring_oriented_from_a_drawing(shapes):
    pieces = shapes.nested_islands() + shapes.circle(20, 0, 1) + shapes.square(30, 0, 1)
    # reverse every other piece: chaining must not care about drawn direction
    pieces = [Piece(p.segment.reversed(), p.layer, p.handle) if i % 2 else p
              for i, p in enumerate(pieces)]
    res = clean_drawing(Drawing(pieces=pieces))
    assert res.is_ok and len(res.bodies) == 4
    for body in res.bodies:
        assert body.outer.signed_area() > 0
        assert all(h.signed_area() < 0 for h in body.holes)
        body.outer.check_closed(1e-12)
        for h in body.holes:
            h.check_closed(1e-12)


def test_audit_is_json_able(shapes):
    import json

    res = clean_drawing(shapes.square(0, 0, 2, tag="a") + shapes.square(1, 1, 2, tag="b"))
    text = json.dumps(res.audit.to_dict())
    assert '"code": "crossing"' in text


def test_nothing_to_clean():
    with pytest.raises(GeometryError, match="nothing to clean"):
        clean_drawing([])
    with pytest.raises(GeometryError, match="must be positive"):
        clean_drawing([Piece(Line((0, 0), (1, 0)))], gap_tol_m=-1.0)


def test_large_drawing_is_quick(shapes):
    rng = np.random.default_rng(7)
    pieces = []
    for k, (x, y) in enumerate(rng.uniform(0, 1000, size=(300, 2)).round(0)):
        pieces += shapes.circle(x * 10, y * 10, 1.0, tag=f"c{k}")
    res = clean_drawing(pieces)
    assert res.is_ok and len(res.bodies) == 300
