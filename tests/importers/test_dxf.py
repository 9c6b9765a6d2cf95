"""DXF reader: every entity and transform drawn with ezdxf, read back, compared exactly.

Expected values are closed forms worked out by hand ("exact geometry"):
areas pi r^2, pi a b, perimeters 2 pi r, positions from composing the block
transforms by hand. Arcs stay arcs, so the checks hold to rounding (1e-12).
"""

from __future__ import annotations

import logging
import math
import time
from pathlib import Path

import ezdxf
import numpy as np
import pytest
from sectionwave.importers import DrawingError
from sectionwave.importers.clean import clean_drawing
from sectionwave.importers.curves import EllipticalArc
from sectionwave.importers.dxf import read_dxf

RTOL = 1e-12


def new_doc(units: int = 6) -> ezdxf.document.Drawing:
    return ezdxf.new("R2018", units=units)


def save(doc: ezdxf.document.Drawing, tmp_path: Path, name: str = "d.dxf") -> Path:
    path = tmp_path / name
    doc.saveas(path)
    return path


def bodies_of(path: Path, **kw):
    res = clean_drawing(read_dxf(path, **kw))
    assert res.is_ok, [e.message for e in res.audit.errors]
    return res


def test_circle_area_and_perimeter_exact(tmp_path):
    doc = new_doc(units=4)  # mm
    doc.modelspace().add_circle((3, 4), 7)
    res = bodies_of(save(doc, tmp_path))
    (body,) = res.bodies
    r = 7e-3
    # exact geometry: pi r^2 and 2 pi r
    assert body.area() == pytest.approx(math.pi * r**2, rel=RTOL)
    assert body.perimeter() == pytest.approx(2 * math.pi * r, rel=RTOL)
    assert body.outer.segments[0].kind == "arc"


def test_arc_and_line_half_disc(tmp_path):
    doc = new_doc()
    msp = doc.modelspace()
    msp.add_arc((0, 0), 2, 0, 180)
    msp.add_line((-2, 0), (2, 0))
    (body,) = bodies_of(save(doc, tmp_path)).bodies
    # exact geometry: half disc
    assert body.area() == pytest.approx(math.pi * 4 / 2, rel=RTOL)
    assert body.perimeter() == pytest.approx(2 * math.pi + 4, rel=RTOL)


def test_lwpolyline_bulges_stadium(tmp_path):
    doc = new_doc()
    half_l, r = 3.0, 1.0
    # bulge 1 is a half circle: a stadium 2L x 2r with round ends
    pts = [(-half_l, -r, 0), (half_l, -r, 1), (half_l, r, 0), (-half_l, r, 1)]
    doc.modelspace().add_lwpolyline(pts, format="xyb", close=True)
    (body,) = bodies_of(save(doc, tmp_path)).bodies
    # exact geometry: rectangle plus one full disc
    assert body.area() == pytest.approx(4 * half_l * r + math.pi * r**2, rel=RTOL)
    assert body.perimeter() == pytest.approx(4 * half_l + 2 * math.pi * r, rel=RTOL)
    assert sorted(s.kind for s in body.outer.segments) == ["arc", "arc", "line", "line"]


def test_polyline2d_with_bulge_quarter_rounding(tmp_path):
    doc = new_doc()
    b = math.tan(math.pi / 8)  # quarter circle, counter-clockwise
    pl = doc.modelspace().add_polyline2d([(0, 0), (2, 0), (2, 1), (1, 2), (0, 2)], close=True)
    pl.vertices[2].dxf.bulge = b  # arc (2,1) -> (1,2), centre (1,1), radius 1
    (body,) = bodies_of(save(doc, tmp_path)).bodies
    # exact geometry: 2x2 square minus a unit corner square plus a quarter disc
    assert body.area() == pytest.approx(4 - 1 + math.pi / 4, rel=RTOL)
    assert body.perimeter() == pytest.approx(2 + 1 + 1 + 2 + math.pi / 2, rel=RTOL)


def test_full_and_partial_ellipse(tmp_path):
    doc = new_doc()
    msp = doc.modelspace()
    msp.add_ellipse((0, 0), major_axis=(3, 0), ratio=0.5)  # full, a=3 b=1.5
    msp.add_ellipse((10, 0), major_axis=(0, 2), ratio=0.5, start_param=0, end_param=math.pi)
    # the half ellipse runs from (10, 2) to (10, -2) through x < 10; close it
    msp.add_line((10, -2), (10, 2))
    res = bodies_of(save(doc, tmp_path))
    areas = sorted(b.area() for b in res.bodies)
    # exact geometry: pi a b and half of pi a b
    assert areas[1] == pytest.approx(math.pi * 3 * 1.5, rel=RTOL)
    assert areas[0] == pytest.approx(math.pi * 2 * 1 / 2, rel=RTOL)


def test_rational_spline_quarter_circle(tmp_path):
    doc = new_doc()
    msp = doc.modelspace()
    r = 2.0
    w = math.sqrt(0.5)
    # exact geometry: a quadratic NURBS with weights (1, 1/sqrt 2, 1) is a quarter circle
    msp.add_rational_spline([(r, 0), (r, r), (0, r)], [1, w, 1], degree=2,
                            knots=[0, 0, 0, 1, 1, 1])
    msp.add_line((0, r), (0, 0))
    msp.add_line((0, 0), (r, 0))
    (body,) = bodies_of(save(doc, tmp_path)).bodies
    assert body.area() == pytest.approx(math.pi * r**2 / 4, rel=RTOL)
    assert body.perimeter() == pytest.approx(math.pi * r / 2 + 2 * r, rel=RTOL)
    spline = next(s for s in body.outer.segments if s.kind == "bspline")
    mid = spline.points(np.linspace(0, 1, 7))
    np.testing.assert_allclose(np.hypot(mid[:, 0], mid[:, 1]), r, rtol=RTOL)


def test_hatch_boundary_paths(tmp_path):
    doc = new_doc()
    hatch = doc.modelspace().add_hatch()
    # polyline path with one half-circle bulge, and an edge path with a full arc
    hatch.paths.add_polyline_path([(0, 0, 0), (2, 0, 1), (2, 2, 0), (0, 2, 0)], is_closed=True)
    edges = hatch.paths.add_edge_path()
    edges.add_arc((10, 0), 1.5, 0, 360)
    res = bodies_of(save(doc, tmp_path))
    areas = sorted(b.area() for b in res.bodies)
    # exact geometry: square 2x2 plus half disc radius 1; disc radius 1.5
    assert areas == pytest.approx(sorted([4 + math.pi / 2, math.pi * 1.5**2]), rel=RTOL)
    with pytest.raises(DrawingError, match="no closed outline.*1 HATCH"):
        read_dxf(save(doc, tmp_path), hatch_boundaries=False)


def test_hatch_over_its_outline_is_a_duplicate(tmp_path):
    doc = new_doc()
    msp = doc.modelspace()
    pts = [(0, 0), (3, 0), (3, 1), (0, 1)]
    msp.add_lwpolyline(pts, close=True)
    msp.add_hatch().paths.add_polyline_path(pts, is_closed=True)
    res = clean_drawing(read_dxf(save(doc, tmp_path)))
    assert res.is_ok and len(res.bodies) == 1
    assert res.audit.codes()["duplicate-removed"] == 4
    assert res.bodies[0].area() == pytest.approx(3.0, rel=RTOL)


def test_nested_rotated_scaled_mirrored_block(tmp_path):
    doc = new_doc()
    inner = doc.blocks.new("INNER")
    inner.add_circle((1, 0), 0.1)
    outer = doc.blocks.new("OUTER")
    outer.add_blockref("INNER", (2, 0), dxfattribs={"xscale": -1, "rotation": 90})
    doc.modelspace().add_blockref(
        "OUTER", (10, 5), dxfattribs={"xscale": 2, "yscale": 2, "rotation": 30}
    )
    (body,) = bodies_of(save(doc, tmp_path)).bodies
    arc = body.outer.segments[0]
    assert isinstance(arc, EllipticalArc)
    # exact geometry, by hand: (1,0) -> mirror x -> (-1,0) -> rotate 90 -> (0,-1)
    # -> + (2,0) -> (2,-1) -> scale 2 -> (4,-2) -> rotate 30 -> + (10,5)
    c30, s30 = math.cos(math.pi / 6), math.sin(math.pi / 6)
    expect = np.array([10 + 4 * c30 + 2 * s30, 5 + 4 * s30 - 2 * c30])
    np.testing.assert_allclose(arc.center, expect, rtol=RTOL, atol=1e-12)
    assert body.area() == pytest.approx(math.pi * 0.2**2, rel=RTOL)
    # a point of the circle: (1.1, 0) in INNER goes to centre + 0.2 * (rotated (0,-1))
    pts = arc.points(np.linspace(0, 1, 9))
    np.testing.assert_allclose(np.hypot(*(pts - expect).T), 0.2, rtol=RTOL)
    assert body.outer.is_ccw


def test_unequal_scaling_turns_circle_into_exact_ellipse(tmp_path):
    doc = new_doc()
    blk = doc.blocks.new("C")
    blk.add_circle((0, 0), 1.0)
    doc.modelspace().add_blockref("C", (0, 0), dxfattribs={"xscale": 3, "yscale": 0.5,
                                                            "rotation": 20})
    (body,) = bodies_of(save(doc, tmp_path)).bodies
    assert body.outer.segments[0].kind == "elliptical_arc"
    # exact geometry: ellipse with semi-axes 3 and 0.5
    assert body.area() == pytest.approx(math.pi * 1.5, rel=RTOL)


def test_minsert_array(tmp_path):
    doc = new_doc()
    blk = doc.blocks.new("DOT")
    blk.add_circle((0, 0), 0.25)
    ref = doc.modelspace().add_blockref("DOT", (0, 0))
    ref.grid(size=(2, 3), spacing=(1.0, 2.0))  # 2 rows, 3 columns
    res = bodies_of(save(doc, tmp_path))
    assert len(res.bodies) == 6
    centers = sorted(tuple(np.round(b.outer.segments[0].center, 12)) for b in res.bodies)
    expect = sorted((2.0 * c, 1.0 * r) for r in range(2) for c in range(3))
    np.testing.assert_allclose(centers, expect, atol=1e-12)


def test_extrusion_minus_z_is_mirrored(tmp_path):
    doc = new_doc()
    msp = doc.modelspace()
    msp.add_circle((5, 2), 1, dxfattribs={"extrusion": (0, 0, -1)})
    msp.add_arc((0, 0), 1, 0, 90, dxfattribs={"extrusion": (0, 0, -1)})
    d = read_dxf(save(doc, tmp_path))
    circle, quarter = (p.segment for p in d.pieces)
    # exact geometry: the OCS of extrusion -z has x axis (-1, 0, 0) and y axis (0, 1, 0)
    np.testing.assert_allclose(circle.center, [-5, 2], atol=1e-15)
    # the OCS arc from (1,0) to (0,1) counter-clockwise runs clockwise from (-1,0) to (0,1)
    np.testing.assert_allclose(quarter.start, [-1, 0], atol=1e-15)
    np.testing.assert_allclose(quarter.end, [0, 1], atol=1e-15)
    mid = quarter.points(0.5)[0]
    np.testing.assert_allclose(mid, [-math.sqrt(0.5), math.sqrt(0.5)], atol=1e-15)


def test_inch_and_mm_drawings_give_the_same_metres(tmp_path):
    a = new_doc(units=1)  # inches
    a.modelspace().add_circle((1, 1), 1.0)
    b = new_doc(units=4)  # mm
    b.modelspace().add_circle((25.4, 25.4), 25.4)
    (ba,) = bodies_of(save(a, tmp_path, "in.dxf")).bodies
    (bb,) = bodies_of(save(b, tmp_path, "mm.dxf")).bodies
    # exact geometry: 1 in = 25.4 mm by definition
    assert ba.area() == pytest.approx(bb.area(), rel=RTOL)
    assert ba.area() == pytest.approx(math.pi * 0.0254**2, rel=RTOL)


def test_unitless_needs_units(tmp_path):
    doc = new_doc(units=0)
    doc.modelspace().add_circle((0, 0), 1)
    path = save(doc, tmp_path)
    with pytest.raises(DrawingError, match=r"units unknown.*give units"):
        read_dxf(path)
    d = read_dxf(path, units="cm")
    assert d.units == "cm" and d.scale_to_m == 0.01
    assert d.pieces[0].segment.axes[0, 0] == pytest.approx(0.01, rel=RTOL)


def test_units_override_is_noted(tmp_path):
    doc = new_doc(units=4)
    doc.modelspace().add_circle((0, 0), 1)
    d = read_dxf(save(doc, tmp_path), units="in")
    assert d.scale_to_m == 0.0254
    assert any("overridden" in n for n in d.notes)


def test_layers_state_and_filters(tmp_path):
    doc = new_doc()
    doc.layers.add("HULL")
    doc.layers.add("HIDDEN").off()
    doc.layers.add("ICE").freeze()
    msp = doc.modelspace()
    msp.add_circle((0, 0), 1, dxfattribs={"layer": "HULL"})
    msp.add_circle((5, 0), 1, dxfattribs={"layer": "HIDDEN"})
    msp.add_circle((10, 0), 1, dxfattribs={"layer": "ICE"})
    path = save(doc, tmp_path)
    d = read_dxf(path)
    assert [p.layer for p in d.pieces] == ["HULL"]
    assert not d.layers["HIDDEN"].is_on and d.layers["ICE"].is_frozen
    assert d.skipped["CIRCLE on unselected layer"] == 2
    assert [p.layer for p in read_dxf(path, layers=["hidden"]).pieces] == ["HIDDEN"]
    assert sorted(p.layer for p in read_dxf(path, layers="*I*").pieces) == ["HIDDEN", "ICE"]
    with pytest.raises(DrawingError, match="no layer matches 'MAST'.*'HULL'"):
        read_dxf(path, layers="MAST")


def test_block_layer_zero_takes_insert_layer(tmp_path):
    doc = new_doc()
    blk = doc.blocks.new("B")
    blk.add_circle((0, 0), 1)  # layer "0"
    blk.add_circle((5, 0), 1, dxfattribs={"layer": "OWN"})
    doc.modelspace().add_blockref("B", (0, 0), dxfattribs={"layer": "MAST"})
    d = read_dxf(save(doc, tmp_path))
    assert sorted(p.layer for p in d.pieces) == ["MAST", "OWN"]
    assert all("in INSERT #" in p.source for p in d.pieces)


def test_annotation_is_counted_not_guessed(tmp_path):
    doc = new_doc()
    msp = doc.modelspace()
    msp.add_circle((0, 0), 1)
    msp.add_text("label")
    msp.add_mtext("note")
    msp.add_point((1, 1))
    msp.add_linear_dim(base=(0, 3), p1=(0, 0), p2=(3, 0)).render()
    d = read_dxf(save(doc, tmp_path))
    assert d.skipped["TEXT"] == 1 and d.skipped["MTEXT"] == 1 and d.skipped["POINT"] == 1
    assert d.skipped["DIMENSION"] == 1
    assert len(d.pieces) == 1


def test_3d_entity_refused_with_handle(tmp_path):
    doc = new_doc()
    msp = doc.modelspace()
    msp.add_circle((0, 0), 1)
    face = msp.add_3dface([(0, 0, 0), (1, 0, 0), (1, 1, 1)])
    with pytest.raises(DrawingError, match=rf"3D entity refused: 3DFACE #{face.dxf.handle}"):
        read_dxf(save(doc, tmp_path))


def test_tilted_arc_and_3d_polyline_refused(tmp_path):
    doc = new_doc()
    arc = doc.modelspace().add_circle((0, 0), 1, dxfattribs={"extrusion": (0, 1, 1)})
    with pytest.raises(DrawingError, match=rf"CIRCLE #{arc.dxf.handle}.*tilted"):
        read_dxf(save(doc, tmp_path))
    doc = new_doc()
    pl = doc.modelspace().add_polyline3d([(0, 0, 0), (1, 0, 1), (1, 1, 0)])
    with pytest.raises(DrawingError, match=rf"POLYLINE #{pl.dxf.handle}"):
        read_dxf(save(doc, tmp_path))


def test_truncated_dxf(tmp_path):
    doc = new_doc()
    for i in range(50):
        doc.modelspace().add_circle((3 * i, 0), 1)
    full = save(doc, tmp_path).read_bytes()
    cut = full.index(b"ENTITIES") + (len(full) - full.index(b"ENTITIES")) // 2
    path = tmp_path / "cut.dxf"
    path.write_bytes(full[:cut])
    t0 = time.perf_counter()
    with pytest.raises(DrawingError, match="truncated"):
        read_dxf(path)
    assert time.perf_counter() - t0 < 2.0


def test_not_a_dxf_file(tmp_path):
    path = tmp_path / "photo.dxf"
    path.write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(200))
    with pytest.raises(DrawingError, match=r"not a DXF file \(it starts with"):
        read_dxf(path)


def test_missing_file(tmp_path):
    with pytest.raises(DrawingError, match="no such file"):
        read_dxf(tmp_path / "nope.dxf")


def test_empty_drawing(tmp_path):
    with pytest.raises(DrawingError, match="no closed outline.*found nothing"):
        read_dxf(save(new_doc(), tmp_path))


def test_handles_and_sources_name_the_entity(tmp_path):
    doc = new_doc()
    pl = doc.modelspace().add_lwpolyline([(0, 0), (1, 0), (1, 1)], close=True)
    d = read_dxf(save(doc, tmp_path))
    assert {p.handle for p in d.pieces} == {pl.dxf.handle}
    assert all(f"of LWPOLYLINE #{pl.dxf.handle}" in p.source for p in d.pieces)


# ---------------------------------------------------------------- files written by others


def test_wild_binary_dxf(wild_dir):
    d = read_dxf(wild_dir / "bin_dxf_r12.dxf", units="mm")
    assert d.entity_counts["LINE"] == 3  # README of the folder
    assert any("binary" in n for n in d.notes)


def test_wild_expectations(wild_dir):
    # README of the folder: what each file holds
    with pytest.raises(DrawingError, match="no closed outline"):
        read_dxf(wild_dir / "MODEL.dxf")
    with pytest.raises(DrawingError, match="no closed outline"):
        read_dxf(wild_dir / "bin_dxf_r2000.dxf")
    with pytest.raises(DrawingError, match="3D entity refused"):
        read_dxf(wild_dir / "POLI-ALL210_12.DXF", units="mm")
    with pytest.raises(DrawingError, match="units unknown"):
        read_dxf(wild_dir / "R12_with_trash_beyond_EOF.dxf")
    d = read_dxf(wild_dir / "R12_with_trash_beyond_EOF.dxf", units="mm")
    assert d.entity_counts == {"CIRCLE": 1}
    d = read_dxf(wild_dir / "recover01.dxf", units="mm")
    assert d.entity_counts["LINE"] + d.skipped["zero-length LINE"] == 1441
    assert sum(n.startswith("repaired") for n in d.notes) >= 60


def test_wild_files_import_or_fail_in_one_line(wild_dir, caplog):
    caplog.set_level(logging.DEBUG)
    names = sorted(p.name for p in wild_dir.iterdir() if p.suffix.lower() == ".dxf")
    assert len(names) >= 15
    for name in names:
        try:
            d = read_dxf(wild_dir / name, units="mm")
        except DrawingError as exc:
            assert "\n" not in str(exc) and name in str(exc)
        else:
            assert d.pieces
    # ezdxf's own log lines go into the notes, not to the user's terminal
    assert not [r for r in caplog.records if r.name.startswith("ezdxf")]


# ---------------------------------------------------------------- repeated knots, flat 3D, bad entity


def _nurbs_circle_spline(msp, cx, cy, r):
    # The rational quadratic circle of nine control points and double
    # interior knots (Piegl and Tiller, The NURBS Book, 2nd ed., section 7.5;
    # weights 1, sqrt(2)/2 alternating; from memory), as CAD programs store it.
    w = math.sqrt(0.5)
    ctrl = [(1, 0), (1, 1), (0, 1), (-1, 1), (-1, 0), (-1, -1), (0, -1), (1, -1), (1, 0)]
    ctrl = [(cx + r * x, cy + r * y, 0.0) for x, y in ctrl]
    return msp.add_rational_spline(
        ctrl, [1, w, 1, w, 1, w, 1, w, 1], degree=2,
        knots=[0, 0, 0, 1, 1, 2, 2, 3, 3, 4, 4, 4],
    )


def test_nurbs_circle_with_repeated_knots(tmp_path):
    doc = new_doc()
    spl = _nurbs_circle_spline(doc.modelspace(), 1.0, 2.0, 0.5)
    d = read_dxf(save(doc, tmp_path))
    # one segment per quarter: each double knot is a joint
    assert len(d.pieces) == 4 and all(p.handle == spl.dxf.handle for p in d.pieces)
    res = bodies_of(save(doc, tmp_path))
    body = res.bodies[0]
    # exact geometry: area pi r^2, perimeter 2 pi r
    assert body.area() == pytest.approx(math.pi * 0.25, rel=RTOL)
    assert body.perimeter() == pytest.approx(math.pi, rel=RTOL)
    # a circle is smooth: no corner at the joints, curvature 1/r everywhere
    assert not body.outer.corner_flags().any()
    for seg in body.outer.segments:
        assert np.allclose(seg.curvature(np.linspace(0, 1, 7)), 2.0, rtol=1e-12)


def test_joined_bezier_spline_corners_become_joints(tmp_path):
    #   (0,1) +-----+ (1,1)    a closed cubic B-spline whose knots repeat
    #         |     |          three times at each corner: four straight
    #   (0,0) +-----+ (1,0)    Bezier pieces, four corners (area 1, perimeter 4)
    doc = new_doc()
    corners = [(0, 0), (1, 0), (1, 1), (0, 1), (0, 0)]
    ctrl = [corners[0]]
    for a, b in zip(corners[:-1], corners[1:]):
        a, b = np.array(a, float), np.array(b, float)
        ctrl += [tuple(a + (b - a) / 3), tuple(a + 2 * (b - a) / 3), tuple(b)]
    knots = [0] * 4 + [1] * 3 + [2] * 3 + [3] * 3 + [4] * 4
    doc.modelspace().add_open_spline([(x, y, 0) for x, y in ctrl], degree=3, knots=knots)
    res = bodies_of(save(doc, tmp_path))
    outer = res.bodies[0].outer
    assert len(outer.segments) == 4
    assert outer.corner_flags().all()
    assert res.bodies[0].area() == pytest.approx(1.0, rel=RTOL)
    assert res.bodies[0].perimeter() == pytest.approx(4.0, rel=RTOL)


def test_polyline_flagged_3d_at_one_height_is_read(tmp_path):
    doc = new_doc()
    doc.modelspace().add_polyline3d([(0, 0, 7), (2, 0, 7), (2, 1, 7), (0, 1, 7)], close=True)
    res = bodies_of(save(doc, tmp_path))
    assert res.bodies[0].area() == pytest.approx(2.0, rel=RTOL)


def test_true_3d_polyline_refused_with_reason(tmp_path):
    doc = new_doc()
    pl = doc.modelspace().add_polyline3d([(0, 0, 0), (1, 0, 1), (1, 1, 0)], close=True)
    with pytest.raises(DrawingError, match=rf"POLYLINE #{pl.dxf.handle} .*true 3D polyline "
                                           r"\(vertex z from 0 to 1"):
        read_dxf(save(doc, tmp_path))


def _strip_subclass_markers(text: str, dxftype: str) -> str:
    start = text.index(f"  0\n{dxftype}\n", text.index("ENTITIES"))
    end = text.index("  0\n", start + 5)
    chunk = text[start:end]
    bare = "".join(
        f"{c}\n{v}\n" for c, v in zip(chunk.splitlines()[::2], chunk.splitlines()[1::2])
        if c.strip() != "100"
    )
    return text[:start] + bare + text[end:]


@pytest.mark.parametrize("dxftype", ["LWPOLYLINE", "SPLINE", "HATCH"])
def test_entity_without_subclass_markers_is_dropped_and_reported(tmp_path, dxftype):
    # Older writers leave the subclass markers (group code 100) out; ezdxf
    # refuses such an LWPOLYLINE, SPLINE or HATCH and with it the whole file.
    doc = ezdxf.new("R2000", units=6)
    msp = doc.modelspace()
    msp.add_circle((0, 0), 1)
    if dxftype == "LWPOLYLINE":
        msp.add_lwpolyline([(3, 0), (4, 0), (4, 1)], close=True)
    elif dxftype == "SPLINE":
        msp.add_spline([(3, 0), (4, 1), (5, 0), (6, 1)])
    else:
        msp.add_hatch().paths.add_polyline_path([(3, 0), (4, 0), (4, 1)])
    path = save(doc, tmp_path)
    path.write_text(_strip_subclass_markers(path.read_text(), dxftype))
    d = read_dxf(path)
    assert d.entity_counts == {"CIRCLE": 1}
    assert any(n.startswith(f"dropped unreadable entity {dxftype}") for n in d.notes)
    res = clean_drawing(d)
    assert any(f"dropped unreadable entity {dxftype}" in n for n in res.audit.notes)
