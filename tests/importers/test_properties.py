"""Property-based checks of the drawing readers (hypothesis, derandomised).

Random valid shapes written through ezdxf and as SVG read back with the
area, orientation and hole count that shapely computes from the same
coordinates (polygons: exact to rounding; arcs: pi r^2 in closed form).
Random path data and transform strings raise nothing but DrawingError.
"""

from __future__ import annotations

import math

import ezdxf
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sectionwave.importers import DrawingError, clean_drawing, read_drawing
from sectionwave.importers.svg import parse_path_data, parse_transform

SETTINGS = settings(max_examples=40, deadline=None, derandomize=True,
                    suppress_health_check=[HealthCheck.function_scoped_fixture])


@st.composite
def star_polygons(draw):
    """A star-shaped polygon around the origin and, maybe, a hole inside it.

    Angle gaps stay below 90 degrees and radii above 0.3, so every edge keeps
    at least 0.3 cos 45 = 0.21 from the centre; the hole's radii stay below
    0.2: the hole is always inside, and neither ring crosses itself.
    """
    n = draw(st.integers(5, 14))
    base = np.linspace(0.0, 2 * math.pi, n, endpoint=False)
    jitter = np.array(draw(st.lists(st.floats(-0.3, 0.3), min_size=n, max_size=n)))
    ang = base + jitter * (2 * math.pi / n)
    radii = np.array(draw(st.lists(st.floats(0.3, 1.0), min_size=n, max_size=n)))
    outer = np.column_stack([radii * np.cos(ang), radii * np.sin(ang)])
    hole = None
    if draw(st.booleans()):
        hole = 0.2 * outer / radii.max()
    scale = draw(st.sampled_from([1.0, 25.0, 400.0]))
    shift = np.array(draw(st.tuples(st.floats(-500, 500), st.floats(-500, 500))))
    clockwise = draw(st.booleans())
    if clockwise:
        outer = outer[::-1]
    return outer * scale + shift, None if hole is None else hole * scale + shift


def _reference(outer, hole):
    from shapely.geometry import Polygon

    return Polygon(outer, [] if hole is None else [hole])


def _check_body(path, outer, hole):
    """The drawing reads back as one body with the reference's area, orientation and holes."""
    res = clean_drawing(read_drawing(path))
    assert res.is_ok
    (body,) = res.bodies
    ref = _reference(outer, hole)
    assert body.area() == pytest.approx(ref.area * 1e-6, rel=1e-9)
    assert body.outer.is_ccw and all(not h.is_ccw for h in body.holes)
    assert len(body.holes) == (hole is not None)


@SETTINGS
@given(shape=star_polygons())
def test_dxf_polygons_keep_area_orientation_and_holes(tmp_path, shape):
    outer, hole = shape
    doc = ezdxf.new(units=4)
    msp = doc.modelspace()
    msp.add_lwpolyline(outer.tolist(), close=True)
    if hole is not None:
        msp.add_lwpolyline(hole.tolist(), close=True)
    path = tmp_path / "p.dxf"
    doc.saveas(path)
    _check_body(path, outer, hole)


@SETTINGS
@given(shape=star_polygons())
def test_svg_paths_keep_area_orientation_and_holes(tmp_path, shape):
    outer, hole = shape
    def sub(pts):
        return "M" + " L".join(f"{float(x)!r} {float(y)!r}" for x, y in pts) + " Z"
    d = sub(outer) + (" " + sub(hole) if hole is not None else "")
    path = tmp_path / "p.svg"
    path.write_text('<svg xmlns="http://www.w3.org/2000/svg" width="2000mm" height="2000mm" '
                    f'viewBox="-1000 -1000 2000 2000"><path fill-rule="evenodd" d="{d}"/></svg>')
    _check_body(path, outer, hole)


@SETTINGS
@given(cuts=st.lists(st.floats(1.0, 359.0), min_size=1, max_size=7, unique=True),
       r=st.floats(0.5, 200.0), cx=st.floats(-100, 100), cy=st.floats(-100, 100))
def test_dxf_arc_chains_close_into_the_circle(tmp_path, cuts, r, cx, cy):
    # exact geometry: arcs cut at random angles still bound pi r^2, length 2 pi r
    angles = sorted(cuts)
    if min(np.diff([0.0, *angles, 360.0])) < 1e-3:
        return
    doc = ezdxf.new(units=6)
    msp = doc.modelspace()
    ends = [0.0, *angles, 360.0]
    for a0, a1 in zip(ends[:-1], ends[1:], strict=True):
        msp.add_arc((cx, cy), r, a0, a1)
    path = tmp_path / "a.dxf"
    doc.saveas(path)
    res = clean_drawing(read_drawing(path))
    assert res.is_ok
    (body,) = res.bodies
    assert body.area() == pytest.approx(math.pi * r * r, rel=1e-9)
    assert body.perimeter() == pytest.approx(2 * math.pi * r, rel=1e-9)


PATH_ALPHABET = "MmLlHhVvCcSsQqTtAaZz0123456789.-+eE ,\n"


@settings(max_examples=300, deadline=None, derandomize=True)
@given(st.text(PATH_ALPHABET, max_size=60))
def test_random_path_data_raises_only_drawing_error(d):
    try:
        parse_path_data(d, where="fuzz")
    except DrawingError:
        pass


@settings(max_examples=200, deadline=None, derandomize=True)
@given(st.text("matrixtranslatescalerotateskewXY()0123456789.-e, ", max_size=50))
def test_random_transforms_raise_only_drawing_error(text):
    try:
        m = parse_transform(text, where="fuzz")
    except DrawingError:
        return
    assert m.shape == (3, 3)
