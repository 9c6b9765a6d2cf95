"""Circles and ellipses drawn as one DXF SPLINE solve like the exact curves.

A CAD program stores a circle as a rational quadratic NURBS with double
interior knots (Piegl and Tiller, The NURBS Book, 2nd ed., section 7.5;
nine control points, weights 1 and sqrt(2)/2; from memory). Read from a
DXF file, it must give the series far field of the circle (Balanis ch. 11)
to 1e-8; the same NURBS stretched into an ellipse must give the far field of
the exact DXF ELLIPSE to 1e-8 (two independent descriptions of one curve).
"""

from __future__ import annotations

import math

import ezdxf
import numpy as np
from sectionwave.engine import parse_case, solve_problem

from tests.reference import C0, circle_far_field, relative_error

W = math.sqrt(0.5)
UNIT = [(1, 0), (1, 1), (0, 1), (-1, 1), (-1, 0), (-1, -1), (0, -1), (1, -1), (1, 0)]
KNOTS = [0, 0, 0, 1, 1, 2, 2, 3, 3, 4, 4, 4]


def _solve(path, k, tmp_path, from_deg=10.0):
    case = {
        "wave": {"field": "tm", "frequency_hz": k * C0 / (2 * math.pi)},
        "geometry": {"file": str(path)},
        "body": [{"name": "post", "layer": "POST", "boundary": "pec"}],
        "incident": [{"kind": "plane", "from_deg": from_deg}],
        "output": {"plots": False, "vtk": False},
    }
    return solve_problem(parse_case(case, base_dir=tmp_path).problem).frequencies[0]


def _nurbs(msp, cx, cy, a, b):
    ctrl = [(cx + a * x, cy + b * y, 0.0) for x, y in UNIT]
    msp.add_rational_spline(ctrl, [1, W, 1, W, 1, W, 1, W, 1], degree=2, knots=KNOTS,
                            dxfattribs={"layer": "POST"})


def test_nurbs_circle_spline_matches_series(tmp_path):
    doc = ezdxf.new(units=4)  # mm
    _nurbs(doc.modelspace(), 10.0, -5.0, 40.0, 40.0)
    path = tmp_path / "nurbs_circle.dxf"
    doc.saveas(path)
    radius, ka = 0.04, 6.0
    k = ka / radius
    fr = _solve(path, k, tmp_path)
    ref = circle_far_field(ka, k, fr.angles_deg, 10.0, "dirichlet", center=(0.01, -0.005))
    assert relative_error(fr.farfield[:, 0], ref) < 1e-8


def test_nurbs_ellipse_spline_matches_exact_ellipse(tmp_path):
    k = 6.0 / 0.04
    far = []
    for how in ("spline", "ellipse"):
        doc = ezdxf.new(units=4)
        msp = doc.modelspace()
        if how == "spline":
            _nurbs(msp, 0.0, 0.0, 40.0, 25.0)
        else:
            msp.add_ellipse((0, 0), (40, 0, 0), 25.0 / 40.0, dxfattribs={"layer": "POST"})
        path = tmp_path / f"{how}.dxf"
        doc.saveas(path)
        far.append(_solve(path, k, tmp_path, from_deg=30.0).farfield[:, 0])
    assert relative_error(far[0], far[1]) < 1e-8
    assert np.all(np.isfinite(far[0]))
