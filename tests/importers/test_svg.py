"""SVG reader: shapes, path grammar, exact transforms, units, hidden elements, unsafe XML.

Expected values are closed forms ("exact geometry"): an affine map A sends
a disc of radius r to an ellipse of area |det A| pi r^2, and sends the
point at angle theta to A (c + r (cos theta, sin theta)) + b. Unit
constants are the exact definitions (1 in = 25.4 mm, 1 px = 1/96 in,
1 pt = 1/72 in, 1 pc = 12 pt).
"""

from __future__ import annotations

import math
import time
from pathlib import Path

import numpy as np
import pytest
from sectionwave.importers import DrawingError
from sectionwave.importers.clean import clean_drawing
from sectionwave.importers.curves import EllipticalArc
from sectionwave.importers.svg import parse_path_data, parse_transform, read_svg

RTOL = 1e-12
MM = 1e-3


def svg(tmp_path: Path, body: str, head: str = 'width="100mm" height="100mm" viewBox="0 0 100 100"',
        name: str = "d.svg") -> Path:
    path = tmp_path / name
    path.write_text(
        f'<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink" '
        f'xmlns:inkscape="http://www.inkscape.org/namespaces/inkscape" {head}>{body}</svg>'
    )
    return path


def only_body(path: Path, **kw):
    res = clean_drawing(read_svg(path, **kw))
    assert res.is_ok, [e.message for e in res.audit.errors]
    (body,) = res.bodies
    return body


def world(m3: np.ndarray, pts: np.ndarray, height_m: float = 0.1) -> np.ndarray:
    """Document user units (mm here) through ``m3`` to metres with y up."""
    p = pts @ m3[:2, :2].T + m3[:2, 2]
    return np.column_stack([p[:, 0] * MM, height_m - p[:, 1] * MM])


def test_circle_under_skew_and_unequal_scale_is_the_exact_ellipse(tmp_path):
    tf_outer = "translate(50 40) skewX(25)"
    tf_inner = "scale(2 0.5) rotate(15) skewY(-10)"
    path = svg(tmp_path, f'<g transform="{tf_outer}"><g transform="{tf_inner}">'
                         f'<circle cx="3" cy="-2" r="7"/></g></g>')
    d = read_svg(path)
    (piece,) = d.pieces
    arc = piece.segment
    assert isinstance(arc, EllipticalArc)
    m3 = parse_transform(tf_outer) @ parse_transform(tf_inner)
    th = np.linspace(0, 2 * math.pi, 17)
    expect = world(m3, np.column_stack([3 + 7 * np.cos(th), -2 + 7 * np.sin(th)]))
    got = arc.points(th / (2 * math.pi))
    np.testing.assert_allclose(got, expect, rtol=0, atol=RTOL * 0.1)
    body = only_body(path)
    # exact geometry: |det| pi r^2
    det = abs(np.linalg.det(m3[:2, :2]))
    assert body.area() == pytest.approx(det * math.pi * 49 * MM**2, rel=RTOL)


def test_ellipse_and_path_arcs_under_skew(tmp_path):
    tf = "matrix(1.5 0.3 -0.7 0.8 10 20) skewX(-30)"
    path = svg(tmp_path, f'<g transform="{tf}">'
                         f'<ellipse cx="10" cy="5" rx="6" ry="2"/>'
                         f'<path d="M40 0 A10 5 0 0 1 20 0 A10 5 0 0 1 40 0 Z"/></g>')
    res = clean_drawing(read_svg(path))
    assert res.is_ok
    det = abs(np.linalg.det(parse_transform(tf)[:2, :2]))
    areas = sorted(b.area() for b in res.bodies)
    # exact geometry: pi a b times |det A|, for both the ellipse and the two half arcs
    assert areas == pytest.approx(sorted([det * math.pi * 12 * MM**2,
                                          det * math.pi * 50 * MM**2]), rel=RTOL)


def test_rotated_arc_end_points_exact():
    (segs,) = parse_path_data("M 0 0 A 5 3 30 1 0 4 2")
    arc = segs[0]
    np.testing.assert_allclose(arc.start, [0, 0], atol=1e-13)
    np.testing.assert_allclose(arc.end, [4, 2], atol=1e-13)
    assert abs(arc.sweep) > math.pi  # large-arc flag


def test_packed_arc_flags_and_numbers():
    a = parse_path_data("M0 0a1 1 0 00 1 1")
    b = parse_path_data("M 0,0 a 1,1 0 0,0 1,1")
    np.testing.assert_allclose(a[0][0].points([0, 0.3, 1]), b[0][0].points([0, 0.3, 1]))
    c = parse_path_data("M0 0a1 1 0 111 1")  # flags 1,1 then x=1, y=1
    assert c[0][0].sweep > 0 and abs(c[0][0].sweep) > math.pi
    (segs,) = parse_path_data("M0,0L10-5.5.5.5")  # 10, -5.5, then .5 .5
    np.testing.assert_allclose(segs[0].end, [10, -5.5])
    np.testing.assert_allclose(segs[1].end, [0.5, 0.5])
    (segs,) = parse_path_data("M1e1-1e-1 2E0,3")
    np.testing.assert_allclose(segs[0].start, [10, -0.1])
    np.testing.assert_allclose(segs[0].end, [2, 3])


def test_implicit_and_relative_commands(tmp_path):
    # exact geometry: 10 x 10 square, written four ways
    for d in ("M0 0 10 0 10 10 0 10z", "m0 0 10 0 0 10 -10 0z", "M0 0H10V10H0Z",
              "m0 0h10v10h-10z"):
        path = svg(tmp_path, f'<path d="{d}"/>')
        assert only_body(path).area() == pytest.approx(100 * MM**2, rel=RTOL)


def test_curves_exact_areas(tmp_path):
    # exact geometry: a parabolic segment has 2/3 of its control triangle (0.5*10*10)
    path = svg(tmp_path, '<path d="M0 0 Q5 10 10 0 Z"/>')
    assert only_body(path).area() == pytest.approx(100 / 3 * MM**2, rel=RTOL)
    # smooth commands reflect the previous control point
    subs = parse_path_data("M0 0 C0 5 10 5 10 0 S20 -5 20 0")
    np.testing.assert_allclose(subs[0][1].control[1], [10, -5])
    subs = parse_path_data("M0 0 Q5 10 10 0 T20 0")
    np.testing.assert_allclose(subs[0][1].control[1], [15, -10])


def test_rect_with_round_corners(tmp_path):
    path = svg(tmp_path, '<rect x="10" y="10" width="40" height="20" rx="5"/>')
    body = only_body(path)
    # exact geometry: w h - (4 - pi) r^2 and 2 (w + h) - 8 r + 2 pi r
    assert body.area() == pytest.approx((800 - (4 - math.pi) * 25) * MM**2, rel=RTOL)
    assert body.perimeter() == pytest.approx((120 - 40 + 10 * math.pi) * MM, rel=RTOL)
    path = svg(tmp_path, '<rect x="0" y="0" width="40" height="20" rx="8" ry="4"/>')
    # exact geometry: elliptical corners remove (4 - pi) rx ry
    assert only_body(path).area() == pytest.approx((800 - (4 - math.pi) * 32) * MM**2,
                                                   rel=RTOL)


def test_line_polyline_polygon(tmp_path):
    path = svg(tmp_path, '<polygon points="0,0 30,0 30,40"/>')
    assert only_body(path).area() == pytest.approx(600 * MM**2, rel=RTOL)
    path = svg(tmp_path, '<polyline points="0 0 30 0 30 40"/><line x1="30" y1="40" x2="0" y2="0"/>')
    assert only_body(path).area() == pytest.approx(600 * MM**2, rel=RTOL)


def test_y_axis_flipped_up(tmp_path):
    path = svg(tmp_path, '<line x1="0" y1="0" x2="10" y2="20"/>')
    (p,) = read_svg(path).pieces
    # viewBox top-left (0, 0) lands at (0, height) with y up
    np.testing.assert_allclose(p.segment.start, [0, 0.1], atol=1e-15)
    np.testing.assert_allclose(p.segment.end, [0.01, 0.08], atol=1e-15)


@pytest.mark.parametrize(
    "head,scale",
    [
        ('width="100mm" height="100mm" viewBox="0 0 100 100"', 1e-3),
        ('width="10cm" height="10cm" viewBox="0 0 100 100"', 1e-3),
        ('width="4in" height="4in" viewBox="0 0 4 4"', 0.0254),
        ('width="72pt" height="72pt" viewBox="0 0 72 72"', 0.0254 / 72),
        ('width="6pc" height="6pc" viewBox="0 0 6 6"', 0.0254 / 6),
        ('width="96" height="96"', 0.0254 / 96),
        ('viewBox="0 0 96 96"', 0.0254 / 96),
        ('width="50mm" height="50mm" viewBox="0 0 100 100"', 0.5e-3),
    ],
)
def test_units(tmp_path, head, scale):
    path = svg(tmp_path, '<circle cx="2" cy="2" r="1"/>', head=head)
    body = only_body(path)
    # exact geometry: pi (r * scale)^2 with the exact unit constants
    assert body.area() == pytest.approx(math.pi * scale**2, rel=RTOL)


def test_inch_and_mm_svg_give_the_same_metres(tmp_path):
    a = svg(tmp_path, '<circle cx="2" cy="2" r="1"/>', 'width="4in" height="4in" viewBox="0 0 4 4"',
            "a.svg")
    b = svg(tmp_path, '<circle cx="50.8" cy="50.8" r="25.4"/>',
            'width="101.6mm" height="101.6mm" viewBox="0 0 101.6 101.6"', "b.svg")
    assert only_body(a).area() == pytest.approx(only_body(b).area(), rel=RTOL)


def test_units_override(tmp_path):
    path = svg(tmp_path, '<circle cx="2" cy="2" r="1"/>', 'width="400" height="400"')
    assert only_body(path, units="cm").area() == pytest.approx(math.pi * 1e-4, rel=RTOL)


def test_viewbox_aspect_ratio(tmp_path):
    # meet: the smaller scale (1 mm per unit) and the viewBox centred horizontally
    path = svg(tmp_path, '<line x1="0" y1="0" x2="10" y2="0"/>',
               'width="200mm" height="100mm" viewBox="0 0 100 100"')
    (p,) = read_svg(path).pieces
    np.testing.assert_allclose(p.segment.start, [0.05, 0.1], atol=1e-15)
    path = svg(tmp_path, '<line x1="0" y1="0" x2="10" y2="0"/>',
               'width="200mm" height="100mm" viewBox="0 0 100 100" preserveAspectRatio="none"')
    (p,) = read_svg(path).pieces
    np.testing.assert_allclose(p.segment.end, [0.02, 0.1], atol=1e-15)


def test_use_and_symbol(tmp_path):
    path = svg(tmp_path, '<defs><circle id="c" cx="0" cy="0" r="2"/>'
                         '<symbol id="s"><rect width="4" height="4"/></symbol></defs>'
                         '<use href="#c" x="10" y="10"/>'
                         '<use xlink:href="#c" transform="scale(2)" x="20" y="20"/>'
                         '<use href="#s" x="60" y="60"/>')
    res = clean_drawing(read_svg(path))
    assert res.is_ok
    areas = sorted(b.area() for b in res.bodies)
    # exact geometry: r = 2 and r = 4 discs, a 4 x 4 square
    assert areas == pytest.approx(sorted([4 * math.pi * MM**2, 16 * math.pi * MM**2,
                                          16 * MM**2]), rel=RTOL)
    centres = sorted(tuple(b.outer.segments[0].center) for b in res.bodies
                     if b.outer.segments[0].kind == "arc")
    np.testing.assert_allclose(centres, [(0.01, 0.09), (0.04, 0.06)], atol=1e-15)


def test_use_loop_refused(tmp_path):
    path = svg(tmp_path, '<g id="a"><use href="#b"/></g><g id="b"><use href="#a"/></g>')
    with pytest.raises(DrawingError, match="loop"):
        read_svg(path)


def test_hidden_elements_skipped(tmp_path):
    path = svg(tmp_path, '<g style="display:none"><circle r="5" cx="20" cy="20"/></g>'
                         '<circle display="none" r="5" cx="40" cy="20"/>'
                         '<g visibility="hidden"><circle r="5" cx="60" cy="20"/>'
                         '<circle style="visibility:visible" r="3" cx="80" cy="20"/></g>')
    d = read_svg(path)
    assert len(d.pieces) == 1
    assert d.pieces[0].segment.axes[0, 0] == pytest.approx(3 * MM, rel=RTOL)
    assert d.skipped["g (display:none)"] == 1 and d.skipped["circle (display:none)"] == 1
    assert d.skipped["circle (visibility:hidden)"] == 1


def test_text_counted_and_empty_drawing(tmp_path):
    path = svg(tmp_path, '<text x="1" y="1">hi</text><circle r="1" cx="5" cy="5"/>')
    assert read_svg(path).skipped["text"] == 1
    path = svg(tmp_path, '<text x="1" y="1">hi</text>')
    with pytest.raises(DrawingError, match="no closed outline.*1 text"):
        read_svg(path)


def test_layers(tmp_path):
    path = svg(tmp_path, '<g inkscape:groupmode="layer" inkscape:label="Hull">'
                         '<circle r="5" cx="20" cy="20"/></g>'
                         '<g id="ribs"><g id="inner"><circle r="5" cx="60" cy="20"/></g></g>')
    d = read_svg(path)
    assert [p.layer for p in d.pieces] == ["Hull", "ribs"]
    assert [p.layer for p in read_svg(path, layers="hu*").pieces] == ["Hull"]
    with pytest.raises(DrawingError, match="no layer matches 'mast'"):
        read_svg(path, layers=["mast"])


def test_bad_path_data_names_the_place(tmp_path):
    path = svg(tmp_path, '<path id="p7" d="M0 0 L10 10 X 5"/>')
    with pytest.raises(DrawingError, match=r"<path id='p7'>: bad path data at character 12"):
        read_svg(path)
    with pytest.raises(DrawingError, match="arc flag"):
        parse_path_data("M0 0 A1 1 0 2 0 1 1")
    with pytest.raises(DrawingError, match="moveto"):
        parse_path_data("L1 1")


def test_bad_transform(tmp_path):
    path = svg(tmp_path, '<g id="g1" transform="rotate(1 2)"><circle r="1"/></g>')
    with pytest.raises(DrawingError, match=r"<g id='g1'>: rotate\(\) takes 1 or 3 numbers"):
        read_svg(path)


BOMB = """<?xml version="1.0"?>
<!DOCTYPE svg [
 <!ENTITY a "aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa">
 <!ENTITY b "&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;">
 <!ENTITY c "&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;&b;">
 <!ENTITY d "&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;&c;">
 <!ENTITY e "&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;&d;">
 <!ENTITY f "&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;&e;">
]>
<svg xmlns="http://www.w3.org/2000/svg"><desc>&f;</desc><circle r="1"/></svg>
"""

XXE = """<?xml version="1.0"?>
<!DOCTYPE svg [<!ENTITY secret SYSTEM "file:///etc/passwd">]>
<svg xmlns="http://www.w3.org/2000/svg"><desc>&secret;</desc><circle r="1"/></svg>
"""


@pytest.mark.parametrize(
    ("name", "text", "message"),
    [
        ("bomb.svg", BOMB, "entity declaration refused.*billion laughs"),
        ("xxe.svg", XXE, "external entity refused.*/etc/passwd"),
    ],
    ids=["entity_bomb", "external_entity"],
)
def test_unsafe_xml_refused_quickly(tmp_path, name, text, message):
    path = tmp_path / name
    path.write_text(text)
    t0 = time.perf_counter()
    with pytest.raises(DrawingError, match=message):
        read_svg(path)
    assert time.perf_counter() - t0 < 1.0


def test_size_cap_and_malformed_xml(tmp_path):
    path = svg(tmp_path, '<circle r="1"/>')
    with pytest.raises(DrawingError, match="over the 10-byte cap"):
        read_svg(path, max_bytes=10)
    bad = tmp_path / "bad.svg"
    bad.write_text("<svg><circle r='1'></svg>")
    with pytest.raises(DrawingError, match="not well-formed XML at line 1"):
        read_svg(bad)
    other = tmp_path / "other.svg"
    other.write_text("<html/>")
    with pytest.raises(DrawingError, match="root element is <html>"):
        read_svg(other)


def test_doctype_without_entities_is_fine(tmp_path):
    path = tmp_path / "dt.svg"
    path.write_text('<?xml version="1.0"?>\n<!DOCTYPE svg PUBLIC "-//W3C//DTD SVG 1.1//EN" '
                    '"http://www.w3.org/Graphics/SVG/1.1/DTD/svg11.dtd">\n'
                    '<svg xmlns="http://www.w3.org/2000/svg"><circle r="1" cx="2" cy="2"/></svg>')
    assert len(read_svg(path).pieces) == 1


def test_mirror_transform_orientation(tmp_path):
    path = svg(tmp_path, '<g transform="scale(-1 1) translate(-50 0)">'
                         '<path d="M0 0 H20 V10 H0 Z M5 2 V8 H15 V2 Z"/></g>')
    body = only_body(path)
    # exact geometry: 20 x 10 minus 10 x 6
    assert body.area() == pytest.approx((200 - 60) * MM**2, rel=RTOL)
    assert body.outer.is_ccw and not body.holes[0].is_ccw


# ---------------------------------------------------------------- SVG 2 rules, viewports, paint


@pytest.mark.parametrize("radii", ['rx="5"', 'ry="5"', 'rx="5" ry="auto"', 'rx="-3" ry="5"'])
def test_ellipse_with_one_radius_is_a_circle(tmp_path, radii):
    # SVG 2 (Geometry Properties, 'rx'/'ry' auto): a missing or auto radius
    # takes the other one's value; a negative value is invalid and is auto.
    body = only_body(svg(tmp_path, f'<ellipse cx="20" cy="20" {radii}/>'))
    assert body.area() == pytest.approx(25 * math.pi * MM**2, rel=RTOL)


def test_symbol_viewbox_and_use_size(tmp_path):
    # the symbol's 10 x 10 viewBox shown in a 40 x 40 <use>: scale 4, so the
    # r = 2 circle at (5, 5) becomes r = 8 at (x + 20, y + 20)
    path = svg(tmp_path, '<defs><symbol id="s" viewBox="0 0 10 10">'
                         '<circle cx="5" cy="5" r="2"/></symbol></defs>'
                         '<use href="#s" x="10" y="30" width="40" height="40"/>')
    body = only_body(path)
    assert body.area() == pytest.approx(math.pi * 64 * MM**2, rel=RTOL)
    np.testing.assert_allclose(body.outer.segments[0].center, [0.030, 0.050], atol=1e-15)


def test_nested_svg_default_size_is_the_parent_viewport(tmp_path):
    # no width/height: 100% of the 100 x 100 parent, so viewBox 0 0 50 50 scales by 2
    path = svg(tmp_path, '<svg viewBox="0 0 50 50"><rect x="10" y="10" width="5" height="5"/>'
                         '</svg>')
    assert only_body(path).area() == pytest.approx(100 * MM**2, rel=RTOL)
    # width in percent of the parent viewport
    path = svg(tmp_path, '<svg width="50%" height="50%" viewBox="0 0 50 50">'
                         '<rect x="10" y="10" width="5" height="5"/></svg>')
    assert only_body(path).area() == pytest.approx(25 * MM**2, rel=RTOL)


def test_nested_viewport_overflow_is_reported_not_clipped(tmp_path):
    path = svg(tmp_path, '<svg id="inner" x="10" y="10" width="20" height="20">'
                         '<circle id="big" cx="10" cy="10" r="15"/></svg>')
    d = read_svg(path)
    assert any("reach outside the viewport" in n and "big" in n and "not applied" in n
               for n in d.notes)
    path = svg(tmp_path, '<svg x="10" y="10" width="20" height="20" overflow="visible">'
                         '<circle cx="10" cy="10" r="15"/></svg>')
    assert not any("outside the viewport" in n for n in read_svg(path).notes)


def test_switch_reads_only_its_first_renderable_child(tmp_path):
    path = svg(tmp_path, '<switch>'
                         '<circle requiredExtensions="http://example.org/x" cx="10" cy="10" r="1"/>'
                         '<circle systemLanguage="fr" cx="20" cy="10" r="2"/>'
                         '<circle systemLanguage="en-GB, de" cx="30" cy="10" r="3"/>'
                         '<circle cx="40" cy="10" r="4"/></switch>')
    d = read_svg(path)
    (piece,) = d.pieces
    assert piece.segment.axes[0, 0] == pytest.approx(3 * MM, rel=RTOL)
    assert d.skipped["switch alternative"] == 3


def test_paint_filled_shapes_are_bodies_outlines_left_out(tmp_path):
    path = svg(tmp_path, '<rect id="bg" width="100" height="100" fill="white"/>'
                         '<rect id="frame" x="2" y="2" width="96" height="96" fill="none" '
                         'stroke="black"/>'
                         '<circle id="rod" cx="50" cy="50" r="10" style="fill:#333"/>')
    d = read_svg(path)
    assert {p.handle for p in d.pieces} == {"rod"}
    assert any("frame" in s and "unfilled" in s for s in d.left_out)
    assert any("bg" in s and "page background" in s for s in d.left_out)
    # paint='all' keeps everything (three nested rings)
    assert {p.handle for p in read_svg(path, paint="all").pieces} == {"bg", "frame", "rod"}


def test_paint_outline_drawing_and_page_frame(tmp_path):
    # nothing filled: outlines count, and the rectangle on the page edges is a frame
    path = svg(tmp_path, '<g fill="none" stroke="black">'
                         '<rect id="page" width="100" height="100"/>'
                         '<rect id="plate" x="20" y="30" width="40" height="10"/></g>')
    d = read_svg(path)
    assert {p.handle for p in d.pieces} == {"plate"}
    assert any("page" in s and "page frame" in s for s in d.left_out)
    # a filled hollow square (white square on a black one) keeps its outer square
    path = svg(tmp_path, '<rect id="o" x="10" y="10" width="80" height="80"/>'
                         '<rect id="i" x="30" y="30" width="40" height="40" fill="#fff"/>')
    res = clean_drawing(read_svg(path))
    assert res.is_ok and len(res.bodies) == 1 and len(res.bodies[0].holes) == 1
    assert res.bodies[0].area() == pytest.approx((6400 - 1600) * MM**2, rel=RTOL)


def test_inspect_shows_what_was_left_out(tmp_path):
    from sectionwave.importers.inspect import format_inspection, inspect_drawing

    path = svg(tmp_path, '<rect id="bg" width="100" height="100" fill="white"/>'
                         '<circle id="rod" cx="50" cy="50" r="10"/>')
    report = inspect_drawing(path)
    assert len(report["left_out"]) == 1
    assert "left out: <rect id='bg'> (rect enclosing every other shape" in format_inspection(report)


def test_filled_path_without_z_is_closed(tmp_path):
    path = svg(tmp_path, '<path id="tri" d="M0 0 L30 0 L30 40"/>')
    d = read_svg(path)
    assert any("no closing Z" in n for n in d.notes)
    assert only_body(path).area() == pytest.approx(600 * MM**2, rel=RTOL)
    # unfilled, it stays open and cleaning says so
    path = svg(tmp_path, '<path id="tri" fill="none" stroke="red" d="M0 0 L30 0 L30 40"/>')
    res = clean_drawing(read_svg(path))
    assert [e.code for e in res.audit.errors] == ["open-chain"]


def test_use_width_and_height_size_a_referenced_svg(tmp_path):
    # the inner svg's viewBox 0 0 10 10 shown 20 x 20 by the <use>: scale 2
    path = svg(tmp_path, '<defs><svg id="tile" viewBox="0 0 10 10" width="5" height="5">'
                         '<rect x="2" y="2" width="6" height="6"/></svg></defs>'
                         '<use href="#tile" x="40" y="40" width="20" height="20"/>')
    body = only_body(path)
    assert body.area() == pytest.approx(144 * MM**2, rel=RTOL)
    xmin, ymin, xmax, ymax = body.outer.bounding_box()
    assert (xmin, xmax) == (pytest.approx(0.044, abs=1e-12), pytest.approx(0.056, abs=1e-12))


def test_clip_path_is_named_in_the_notes(tmp_path):
    path = svg(tmp_path, '<defs><clipPath id="k"><rect width="10" height="10"/></clipPath></defs>'
                         '<circle id="c" cx="5" cy="5" r="8" clip-path="url(#k)"/>')
    d = read_svg(path)
    assert any("clip-path" in n and "not applied" in n for n in d.notes)


def test_css_classes_paint_the_shapes(tmp_path):
    # painted through classes, as design programs write it: a white page
    # background and two unfilled outlines, so the outlines are the bodies
    path = svg(tmp_path, '<defs><style>/* exported */ .cls-1{fill:none;stroke:#000}'
                         ' .cls-2 { fill: #fff } g > path { fill: red }</style></defs>'
                         '<rect id="bg" class="cls-2" width="100" height="100"/>'
                         '<rect id="plate" class="cls-1" x="20" y="20" width="30" height="10"/>'
                         '<circle id="rod" class="cls-1" cx="70" cy="70" r="5"/>')
    d = read_svg(path)
    assert {p.handle for p in d.pieces} == {"plate", "rod"}
    assert any("bg" in s and "page background" in s for s in d.left_out)
    assert any("1 CSS rule(s)" in n for n in d.notes)
    # the style attribute still wins over a class
    path = svg(tmp_path, '<style>.hole{fill:none}</style>'
                         '<rect id="a" x="10" y="10" width="50" height="50"/>'
                         '<rect id="b" class="hole" style="fill:black" x="20" y="20" '
                         'width="10" height="10"/>')
    res = clean_drawing(read_svg(path))
    assert res.is_ok and len(res.bodies[0].holes) == 1
