"""Exact curve classes: B-splines with repeated knots.

Reference: the rational quadratic circle of nine control points with double
interior knots (Piegl and Tiller, The NURBS Book, 2nd ed., section 7.5; from
memory): radius 1 at every parameter, curvature 1, length 2 pi.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from sectionwave.importers.curves import BSpline, Contour

W = math.sqrt(0.5)
CIRCLE = dict(
    knots=[0, 0, 0, 1, 1, 2, 2, 3, 3, 4, 4, 4],
    control=[(1, 0), (1, 1), (0, 1), (-1, 1), (-1, 0), (-1, -1), (0, -1), (1, -1), (1, 0)],
    degree=2,
    weights=[1, W, 1, W, 1, W, 1, W, 1],
)


def test_nurbs_circle_evaluates_everywhere_including_joints():
    spl = BSpline(**CIRCLE)
    t = np.linspace(0, 1, 41)  # holds the joints t = 1/4, 1/2, 3/4
    np.testing.assert_allclose(np.hypot(*spl.points(t).T), 1.0, rtol=1e-14)
    np.testing.assert_allclose(spl.curvature(t), 1.0, rtol=1e-12)
    np.testing.assert_allclose(spl.joints(), [0.25, 0.5, 0.75])
    assert spl.length() == pytest.approx(2 * math.pi, rel=1e-13)


def test_split_pieces_trace_the_same_curve():
    spl = BSpline(**CIRCLE)
    pieces = spl.split_at_joints()
    assert len(pieces) == 4
    c = Contour(pieces)
    c.check_closed(1e-14)
    assert c.signed_area() == pytest.approx(math.pi, rel=1e-13)
    for k, p in enumerate(pieces):
        u = np.linspace(0, 1, 9)
        np.testing.assert_allclose(p.points(u), spl.points((k + u) / 4), atol=1e-14)


def test_knot_of_full_multiplicity_plus_one_breaks_the_curve():
    # degree 1, knot 1 repeated twice (degree + 1): two separate lines
    spl = BSpline([0, 0, 1, 1, 2, 2], [(0, 0), (1, 0), (5, 5), (6, 5)], 1)
    a, b = spl.split_at_joints()
    np.testing.assert_allclose([a.start, a.end, b.start, b.end], [(0, 0), (1, 0), (5, 5), (6, 5)])


def test_invalid_spline_data_refused():
    from sectionwave.importers import GeometryError

    with pytest.raises(GeometryError, match="must not decrease"):
        BSpline([0, 0, 2, 1, 2, 2], [(0, 0), (1, 0), (1, 1)], 2)
    with pytest.raises(GeometryError, match="finite"):
        BSpline([0, 0, 0, 1, 1, 1], [(0, 0), (np.nan, 0), (1, 1)], 2)
