"""Exact curve segments, contours and bodies.

References: the perimeter of an ellipse with semi-axes a >= b is
``4 a E(m)``, ``m = 1 - b^2 / a^2``, with E the complete elliptic integral of
the second kind (DLMF 19.9.9; scipy.special.ellipe uses the parameter m);
its area is ``pi a b`` and its curvature at the end of the major axis
``a / b^2`` (from memory). The rational quadratic with weights
``1, sqrt(2)/2, 1`` on the control points (1, 0), (1, 1), (0, 1) is the
exact quarter of the unit circle (Piegl & Tiller, The NURBS Book, 2nd ed.,
section 7.3, from memory). A B-spline whose control points sit at the
Greville abscissae of a straight line reproduces the line (linear
precision, de Boor, A Practical Guide to Splines, from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import ellipe
from sectionwave.importers.curves import (
    Bezier,
    Body,
    BSpline,
    Contour,
    EllipticalArc,
    Line,
    Segment,
    circular_arc,
    polygon_segments,
)
from sectionwave.importers.errors import GeometryError

T = np.linspace(0.0, 1.0, 11)
T_INNER = np.linspace(0.05, 0.95, 10)


def rotation(deg: float) -> np.ndarray:
    a = math.radians(deg)
    return np.array([[math.cos(a), -math.sin(a)], [math.sin(a), math.cos(a)]])


def check_derivatives(seg: Segment, *, rtol: float = 1e-8) -> None:
    """First and second derivatives against central finite differences (error O(h^2))."""
    h = 1e-5
    t = T_INNER
    fd1 = (seg.points(t + h) - seg.points(t - h)) / (2 * h)
    fd2 = (seg.points(t + h) - 2 * seg.points(t) + seg.points(t - h)) / h**2
    d1, d2 = seg.derivative(t), seg.second_derivative(t)
    scale1 = np.abs(d1).max()
    scale2 = max(np.abs(d2).max(), scale1)
    assert np.abs(fd1 - d1).max() < rtol * scale1
    # the second difference loses digits to cancellation: eps / h^2 ~ 2e-6
    assert np.abs(fd2 - d2).max() < 1e-4 * scale2


def check_reversed(seg: Segment) -> None:
    rev = seg.reversed()
    assert np.allclose(rev.points(T), seg.points(1 - T), atol=1e-14)
    assert np.allclose(rev.derivative(T), -seg.derivative(1 - T), atol=1e-12)
    assert np.allclose(rev.second_derivative(T), seg.second_derivative(1 - T), atol=1e-10)
    assert rev.length() == pytest.approx(seg.length(), rel=1e-14)
    assert rev.area_integral() == pytest.approx(-seg.area_integral(), rel=1e-12, abs=1e-15)


def check_transformed(seg: Segment) -> None:
    m = np.array([[1.5, 0.3], [-0.4, 0.8]])
    b = np.array([2.0, -1.0])
    img = seg.transformed(m, b)
    assert type(img) is type(seg)
    assert np.allclose(img.points(T), seg.points(T) @ m.T + b, atol=1e-13)
    assert np.allclose(img.derivative(T), seg.derivative(T) @ m.T, atol=1e-12)
    assert np.allclose(img.second_derivative(T), seg.second_derivative(T) @ m.T, atol=1e-10)


# ----------------------------------------------------------------- Line


def test_line():
    ln = Line([1.0, 2.0], [4.0, 6.0])
    assert ln.kind == "line"
    assert np.allclose(ln.points([0, 0.5, 1]), [[1, 2], [2.5, 4], [4, 6]])
    assert np.array_equal(ln.start, [1.0, 2.0]) and np.array_equal(ln.end, [4.0, 6.0])
    assert np.allclose(ln.derivative(T), [3.0, 4.0]) and np.all(ln.second_derivative(T) == 0)
    assert ln.length() == 5.0
    assert np.allclose(ln.tangent(0.3), [[0.6, 0.8]])
    assert np.allclose(ln.normal(0.3), [[0.8, -0.6]])  # the tangent turned clockwise
    assert np.all(ln.curvature(T) == 0)
    # the closed form of (x dy - y dx)/2 equals the generic quadrature
    assert ln.area_integral() == pytest.approx(Segment.area_integral(ln), rel=1e-14)
    assert Segment.length(ln) == pytest.approx(5.0, rel=1e-15)
    check_reversed(ln)
    check_transformed(ln)


def test_transform_must_be_two_by_two():
    with pytest.raises(GeometryError, match="must be 2 x 2, got shape \\(3, 3\\)"):
        Line([0, 0], [1, 0]).transformed(np.eye(3))


# ----------------------------------------------------------------- EllipticalArc


def test_full_circle():
    r = 1.7
    arc = circular_arc((0.5, -0.25), r, 0.3, 2 * math.pi)
    assert arc.kind == "arc"
    assert arc.length() == pytest.approx(2 * math.pi * r, rel=1e-14)
    assert arc.area_integral() == pytest.approx(math.pi * r**2 + 0.0, rel=1e-14)
    assert np.allclose(np.hypot(*(arc.points(T) - [0.5, -0.25]).T), r, atol=1e-14)
    assert np.allclose(arc.curvature(T), 1 / r, rtol=1e-13)
    # normal out of the disc for a counter-clockwise circle
    assert np.allclose(arc.normal(T), (arc.points(T) - [0.5, -0.25]) / r, atol=1e-14)
    assert np.allclose(arc.subdivision_hints(), [0, 0.25, 0.5, 0.75, 1.0])
    check_derivatives(arc)
    check_reversed(arc)
    check_transformed(arc)


def test_quarter_arc_and_circular_arc_errors():
    arc = circular_arc((0.0, 0.0), 2.0, math.pi / 2, -math.pi / 2)  # clockwise quarter
    assert np.allclose(arc.start, [0, 2]) and np.allclose(arc.end, [2, 0], atol=1e-15)
    assert arc.length() == pytest.approx(math.pi, rel=1e-14)
    assert np.allclose(arc.curvature(T), -0.5)  # turns right
    assert arc.subdivision_hints().tolist() == [0.0, 1.0]
    with pytest.raises(GeometryError, match="radius must be positive, got -1"):
        circular_arc((0, 0), -1, 0, 1)
    with pytest.raises(GeometryError, match="non-zero axes and sweep"):
        EllipticalArc((0, 0), np.eye(2), 0.0, 0.0)
    with pytest.raises(GeometryError, match="non-zero axes and sweep"):
        EllipticalArc((0, 0), [[1, 2], [2, 4]], 0.0, 1.0)


@pytest.mark.parametrize("a,b,deg", [(2.0, 0.5, 30.0), (1.0, 0.999, -75.0), (3.0, 0.1, 0.0)])
def test_rotated_ellipse_length_area_curvature(a, b, deg):
    center = np.array([1.0, 2.0])
    arc = EllipticalArc(center, rotation(deg) @ np.diag([a, b]), 0.0, 2 * math.pi)
    assert arc.kind == "elliptical_arc"
    assert arc.length() == pytest.approx(4 * a * ellipe(1 - b**2 / a**2), rel=1e-12)
    assert arc.area_integral() == pytest.approx(math.pi * a * b, rel=1e-13)
    assert Segment.area_integral(arc) == pytest.approx(math.pi * a * b, rel=1e-12)
    # at theta = 0 the point is the end of the major axis, curvature a / b^2
    assert arc.curvature(0.0)[0] == pytest.approx(a / b**2, rel=1e-12)
    assert np.allclose(arc.points(0.0)[0], center + rotation(deg) @ [a, 0.0])
    check_derivatives(arc)
    check_reversed(arc)
    check_transformed(arc)


def test_reflected_ellipse_runs_clockwise():
    arc = EllipticalArc((0, 0), np.diag([2.0, -1.0]), 0.0, 2 * math.pi)
    assert arc.area_integral() == pytest.approx(-2 * math.pi, rel=1e-14)
    assert not Contour((arc,)).is_ccw


# ----------------------------------------------------------------- Bezier


CUBIC = np.array([[0.0, 0.0], [1.0, 2.0], [3.0, -1.0], [4.0, 1.0]])


def test_cubic_bezier():
    bz = Bezier(CUBIC)
    assert bz.kind == "cubic_bezier"
    assert np.allclose(bz.start, CUBIC[0]) and np.allclose(bz.end, CUBIC[-1])
    # the end tangents point at the neighbouring control points, 3 (P1 - P0) and 3 (P3 - P2)
    assert np.allclose(bz.derivative([0.0, 1.0]), [3 * (CUBIC[1] - CUBIC[0]), 3 * (CUBIC[3] - CUBIC[2])])
    # de Casteljau at t = 1/2: (P0 + 3 P1 + 3 P2 + P3) / 8
    assert np.allclose(bz.points(0.5)[0], (CUBIC[0] + 3 * CUBIC[1] + 3 * CUBIC[2] + CUBIC[3]) / 8)
    check_derivatives(bz)
    check_reversed(bz)
    check_transformed(bz)


@pytest.mark.parametrize("n,kind", [(2, "line"), (3, "quadratic_bezier"), (6, "bezier")])
def test_bezier_degrees(n, kind):
    rng = np.random.default_rng(n)
    bz = Bezier(rng.standard_normal((n, 2)))
    assert bz.kind == kind
    if n > 2:
        check_derivatives(bz)
    else:
        assert np.all(bz.second_derivative(T) == 0)
    check_reversed(bz)
    check_transformed(bz)


def test_bezier_parabola_area_and_straight_length():
    # y = 2 x (1 - x) as a quadratic Bezier; the area under it is 1/3
    arch = Bezier([[0.0, 0.0], [0.5, 1.0], [1.0, 0.0]])
    c = Contour((arch, Line([1.0, 0.0], [0.0, 0.0])))
    assert c.signed_area() == pytest.approx(-1.0 / 3.0, rel=1e-14)  # over the top first: clockwise
    # evenly spaced collinear control points: uniform speed along the chord
    straight = Bezier([[0, 0], [1, 1], [2, 2], [3, 3]])
    assert straight.length() == pytest.approx(3 * math.sqrt(2), rel=1e-14)
    with pytest.raises(GeometryError, match="at least 2 points"):
        Bezier([[0.0, 0.0]])


# ----------------------------------------------------------------- BSpline


QUARTER = BSpline([0, 0, 0, 1, 1, 1], [[1.0, 0.0], [1.0, 1.0], [0.0, 1.0]], 2, [1.0, math.sqrt(0.5), 1.0])


def test_nurbs_quarter_circle():
    t = np.linspace(0, 1, 101)
    pts = QUARTER.points(t)
    assert np.abs(np.hypot(*pts.T) - 1.0).max() < 1e-14
    assert QUARTER.length() == pytest.approx(math.pi / 2, rel=1e-14)
    assert np.allclose(QUARTER.curvature(t), 1.0, rtol=1e-12)
    # closed with two radii, the quarter disc has area pi/4
    c = Contour((Line([0, 0], [1, 0]), QUARTER, Line([0, 1], [0, 0])))
    assert c.signed_area() == pytest.approx(math.pi / 4, rel=1e-14)
    check_derivatives(QUARTER)
    check_reversed(QUARTER)


def test_nurbs_quarter_circle_transformed_stays_on_its_circle():
    img = QUARTER.transformed(2.0 * rotation(40.0), (1.0, -3.0))
    assert isinstance(img, BSpline)
    assert np.abs(np.hypot(*(img.points(T) - [1.0, -3.0]).T) - 2.0).max() < 1e-14
    check_transformed(QUARTER)


def test_cubic_bspline_with_a_simple_interior_knot_reproduces_a_line():
    knots = [0, 0, 0, 0, 0.5, 1, 1, 1, 1]
    greville = np.array([0.0, 1 / 6, 0.5, 5 / 6, 1.0])
    spl = BSpline(knots, np.column_stack([greville, 2 * greville + 1]), 3)
    assert spl.kind == "bspline"
    assert np.allclose(spl.points(T), np.column_stack([T, 2 * T + 1]), atol=1e-15)
    assert np.allclose(spl.derivative(T), [1.0, 2.0], atol=1e-13)
    assert np.allclose(spl.subdivision_hints(), [0.0, 0.5, 1.0])


def test_cubic_bspline_derivatives_on_a_shifted_knot_span():
    # a knot span of [2, 5] mapped onto t in [0, 1]: derivatives carry the factor 3
    rng = np.random.default_rng(7)
    spl = BSpline([2, 2, 2, 2, 3, 4, 5, 5, 5, 5], rng.standard_normal((6, 2)), 3)
    assert np.allclose(spl.subdivision_hints(), [0, 1 / 3, 2 / 3, 1])
    check_derivatives(spl)
    check_reversed(spl)
    check_transformed(spl)


def test_bspline_errors():
    with pytest.raises(GeometryError, match="needs 6 knots, got 5"):
        BSpline([0, 0, 0, 1, 1], [[0, 0], [1, 1], [2, 0]], 2)
    with pytest.raises(GeometryError, match="must be \\(n, 2\\)"):
        BSpline([0, 0, 1, 1], [0, 1], 1)
    with pytest.raises(GeometryError, match="weights must be positive"):
        BSpline([0, 0, 0, 1, 1, 1], [[0, 0], [1, 1], [2, 0]], 2, [1.0, -1.0, 1.0])
    with pytest.raises(GeometryError, match="one per control point"):
        BSpline([0, 0, 0, 1, 1, 1], [[0, 0], [1, 1], [2, 0]], 2, [1.0, 1.0])


# ----------------------------------------------------------------- Contour


SQUARE = Contour(polygon_segments([[0, 0], [1, 0], [1, 1], [0, 1]]), "square")


def test_contour_area_orientation_and_corners():
    assert SQUARE.signed_area() == pytest.approx(1.0) and SQUARE.is_ccw
    cw = SQUARE.reversed()
    assert cw.signed_area() == pytest.approx(-1.0) and not cw.is_ccw
    assert cw.oriented(ccw=True).is_ccw and SQUARE.oriented(ccw=True) is SQUARE
    assert SQUARE.perimeter() == pytest.approx(4.0)
    assert SQUARE.corner_flags().tolist() == [True] * 4
    assert SQUARE.bounding_box() == (0.0, 0.0, 1.0, 1.0)
    assert SQUARE.sample(8).shape == (32, 2)
    mirrored = SQUARE.transformed([[-1, 0], [0, 1]], (3, 0))
    assert not mirrored.is_ccw and mirrored.signed_area() == pytest.approx(-1.0)
    assert mirrored.source == "square"


def test_smooth_joints_are_not_corners():
    circle = Contour((circular_arc((0, 0), 1.0, 0.0, 2 * math.pi),))
    assert circle.corner_flags().tolist() == [False]
    # a stadium: two lines and two half circles meeting tangentially
    stadium = Contour((
        Line([0, -1], [2, -1]), circular_arc((2, 0), 1.0, -math.pi / 2, math.pi),
        Line([2, 1], [0, 1]), circular_arc((0, 0), 1.0, math.pi / 2, math.pi),
    ))
    stadium.check_closed(1e-12)
    assert stadium.corner_flags().tolist() == [False] * 4
    assert stadium.signed_area() == pytest.approx(4.0 + math.pi, rel=1e-14)
    assert stadium.perimeter() == pytest.approx(4.0 + 2 * math.pi, rel=1e-14)
    # a half disc has two corners where the diameter meets the arc
    half = Contour((Line([-1, 0], [1, 0]), circular_arc((0, 0), 1.0, 0.0, math.pi)))
    assert half.corner_flags().tolist() == [True, True]


def test_check_closed_message():
    c = Contour((Line([0, 0], [1, 0]), Line([1, 0.1], [0, 0])), "LINE 1A")
    c.check_closed(0.2)
    with pytest.raises(GeometryError) as info:
        c.check_closed(1e-6)
    msg = str(info.value)
    assert "contour LINE 1A is open: segment 0 ends at (1, 0) but segment 1 starts 0.1 m away" in msg
    assert "close the outline or raise the gap tolerance" in msg
    unnamed = Contour((Line([0, 0], [1, 0]), Line([1, 0], [0, 0.5])))
    with pytest.raises(GeometryError, match=r"contour \(unnamed\) is open: segment 1 ends at \(0, 0.5\)"):
        unnamed.check_closed(1e-6)


def test_empty_contour():
    with pytest.raises(GeometryError, match="at least one segment \\(empty\\)"):
        Contour((), "empty")


# ----------------------------------------------------------------- Body


def test_body_with_holes():
    outer = Contour(polygon_segments([[0, 0], [0, 4], [4, 4], [4, 0]]))  # clockwise on purpose
    hole_sq = Contour(polygon_segments([[0.5, 0.5], [1.5, 0.5], [1.5, 1.5], [0.5, 1.5]]))  # counter-clockwise
    hole_c = Contour((circular_arc((3.0, 3.0), 0.5, 0.0, 2 * math.pi),))
    body = Body(outer, (hole_sq, hole_c), "plate")
    assert body.outer.is_ccw and not any(h.is_ccw for h in body.holes)
    assert body.contours == (body.outer, *body.holes)
    assert body.area() == pytest.approx(16.0 - 1.0 - math.pi / 4, rel=1e-14)
    assert body.perimeter() == pytest.approx(16.0 + 4.0 + math.pi, rel=1e-14)
    inside = body.contains([[2.0, 2.0], [1.0, 1.0], [3.0, 3.0], [5.0, 1.0], [-0.1, 2.0], [3.0, 2.2]])
    assert inside.tolist() == [True, False, False, False, False, True]
    assert body.contains([2.0, 2.0]).tolist() == [True]


def test_body_transformed_keeps_its_orientation():
    body = Body(SQUARE, (Contour((circular_arc((0.5, 0.5), 0.2, 0.0, 2 * math.pi),)),))
    img = body.transformed([[-2, 0], [0, 1]], (1.0, 0.0))  # a reflection with area factor 2
    assert img.outer.is_ccw and not img.holes[0].is_ccw
    assert img.area() == pytest.approx(2 * (1.0 - math.pi * 0.04), rel=1e-13)
    assert img.contains([[-0.5, 0.1]]).tolist() == [True]
    assert img.contains([[0.0, 0.5]]).tolist() == [False]  # the image of the hole's centre
