"""The case loader: every error a user can hit names the file, the key and what is allowed;
a valid case becomes a Problem in SI units and the output options.

The reference for every message fragment is the schema in ``engine/case.py``'s
module docstring; the physical constants are the SI exact speed of light and
the air values stated in ``engine/problem.py``.
"""

from __future__ import annotations

import copy
import io
import math
import sys

import numpy as np
import pytest
from sectionwave.engine import CaseError, IncidentWave, Medium, load_case, parse_case
from sectionwave.engine.problem import SPEED_OF_LIGHT_M_S, Problem, ProblemError, Scatterer

SRC = "case.toml"
CIRCLE = {"kind": "circle", "radius_m": 0.5}


def base(**top) -> dict:
    """A minimal valid TM case with one PEC circle and one plane wave."""
    doc = {
        "title": "t",
        "wave": {"field": "tm", "frequency_hz": 1e9},
        "body": [{"name": "c", "shape": dict(CIRCLE), "boundary": "pec"}],
        "incident": [{"kind": "plane", "from_deg": 0.0}],
    }
    doc.update(top)
    return doc


def fails(doc: dict, *fragments: str, **kw) -> str:
    """Parse ``doc``; assert a CaseError whose message names the file and holds every fragment."""
    with pytest.raises(CaseError) as info:
        parse_case(doc, source=SRC, **kw)
    msg = str(info.value)
    assert msg.startswith(f"{SRC}: "), msg
    for frag in fragments:
        assert frag in msg, f"{frag!r} not in {msg!r}"
    return msg


def with_body(**changes) -> dict:
    doc = base()
    body = doc["body"][0]
    for key, value in changes.items():
        if value is None:
            body.pop(key, None)
        else:
            body[key] = value
    return doc


def with_shape(shape: dict, **body) -> dict:
    return with_body(shape=shape, **body)


# ----------------------------------------------------------------- top level and [wave]


def test_base_case_is_valid():
    case = parse_case(base(), source=SRC)
    assert isinstance(case.problem, Problem)


def test_missing_wave_table():
    doc = base()
    del doc["wave"]
    fails(doc, "[wave]", "is required", "field and frequency_hz")


@pytest.mark.parametrize("name", ["wave", "far_field", "solver", "output", "geometry", "near_field"])
def test_tables_must_be_tables(name):
    fails(base(**{name: 3}), f"[{name}]", "must be a table")


def test_unknown_top_level_key():
    fails(base(colour="red"), "[colour]", "is not a known key here", "known keys:", "wave")


@pytest.mark.parametrize("field,allowed", [("xray", "tm, te, acoustic"), (3, None)])
def test_unknown_field(field, allowed):
    doc = base()
    doc["wave"]["field"] = field
    msg = fails(doc, "[wave.field]")
    if allowed:
        assert f"is 'xray'; allowed: {allowed}" in msg
    else:
        assert "must be a string" in msg


def test_missing_field_lists_choices():
    doc = base()
    del doc["wave"]["field"]
    fails(doc, "[wave.field]", "is required (a string): one of tm, te, acoustic")


def test_unknown_key_in_wave():
    doc = base()
    doc["wave"]["colour"] = 1
    fails(doc, "[wave.colour]", "is not a known key here", "known keys: field, frequency, frequency_hz")


def test_sound_speed_is_not_a_key_for_em_waves():
    # the speed of light is fixed for tm/te: a sound speed there is a mistake
    doc = base()
    doc["wave"]["sound_speed_m_s"] = 343.0
    fails(doc, "[wave.sound_speed_m_s]", "is not a known key here")


@pytest.mark.parametrize(
    "value,fragment",
    [
        (None, "is required: a number, a list, or {start =, stop =, count =}"),
        (-1e9, "values must be positive"),
        (0, "values must be positive"),
        ([1e9, -2e9], "values must be positive"),
        ("1 kg", "or a frequency with units such as \"9.4 GHz\", got '1 kg'"),
        (True, "must hold finite numbers, got True"),
        ([1e9, "x"], "got 'x'"),
        (float("nan"), "must hold finite numbers"),
        (float("inf"), "must hold finite numbers"),
        ([], "is an empty list"),
        ([1e9, 2e9, 1e9], "repeats a frequency"),
        ({"start": 1e9, "stop": 1e9, "count": 2}, "repeats a frequency"),
        ({"start": 0.0, "stop": 1e9, "count": 3}, "values must be positive"),
    ],
)
def test_bad_frequencies(value, fragment):
    doc = base()
    if value is None:
        del doc["wave"]["frequency_hz"]
    else:
        doc["wave"]["frequency_hz"] = value
    fails(doc, "[wave.frequency_hz]", fragment)


@pytest.mark.parametrize(
    "rng,fragment",
    [
        ({"start": 1e9, "stop": 2e9}, "a range needs exactly start, stop and count, got ['start', 'stop']"),
        ({"start": 1e9, "stop": 2e9, "count": 3, "step": 1}, "a range needs exactly start, stop and count"),
        ({"start": 1e9, "stop": 2e9, "count": 0}, "count must be an integer from 1 to 1000000, got 0"),
        ({"start": 1e9, "stop": 2e9, "count": 2.5}, "count must be an integer from 1 to 1000000, got 2.5"),
        ({"start": 1e9, "stop": 2e9, "count": True}, "count must be an integer from 1 to 1000000, got True"),
        ({"start": "a", "stop": 2e9, "count": 3}, "or a frequency with units such as \"9.4 GHz\", got 'a'"),
        ({"start": 1e9, "stop": float("inf"), "count": 3}, "start and stop must be finite numbers"),
    ],
)
def test_bad_ranges(rng, fragment):
    doc = base()
    doc["wave"]["frequency_hz"] = rng
    fails(doc, "[wave.frequency_hz]", fragment)


@pytest.mark.parametrize("key", ["sound_speed_m_s", "density_kg_m3"])
@pytest.mark.parametrize("value,fragment", [(-1.0, "must be positive"), (0, "must be positive"),
                                            ("fast", "must be a finite number")])
def test_bad_acoustic_medium(key, value, fragment):
    doc = base()
    doc["wave"]["field"] = "acoustic"
    doc["wave"][key] = value
    doc["body"][0]["boundary"] = "soft"
    fails(doc, f"[wave.{key}]", fragment)


# ----------------------------------------------------------------- [[body]]


@pytest.mark.parametrize("value", [None, []])
def test_body_required(value):
    doc = base()
    if value is None:
        del doc["body"]
    else:
        doc["body"] = value
    fails(doc, "[body]", "is required: at least one [[body]] table")


def test_body_must_be_tables():
    fails(base(body=[1]), "[body]", "must be an array of tables [[body]]")


def test_body_without_shape_layer_or_point():
    fails(with_body(shape=None), "[body.0.shape]", 'give exactly one of shape = {...}, layer = "NAME" or point_m = [x, y]')


@pytest.mark.parametrize("extra", [{"layer": "HULL"}, {"point_m": [0.0, 0.0]}])
def test_body_with_two_of_shape_layer_point(extra):
    fails(with_body(**extra), "[body.0.shape]", "give exactly one of")


@pytest.mark.parametrize("pick,value", [("layer", "HULL"), ("point_m", [0.0, 0.0])])
def test_layer_or_point_needs_geometry(pick, value):
    fails(with_body(shape=None, **{pick: value}), f"[body.0.{pick}]", "needs a [geometry] file")


def test_unknown_key_in_body():
    fails(with_body(colour="red"), "[body.0.colour]", "is not a known key here", "boundary", "name", "shape")


def test_second_body_is_named_by_index():
    doc = base()
    doc["body"].append({"name": "d", "shape": {"kind": "circle", "radius_m": 0.1, "center_m": [3, 0]},
                        "boundary": "pec", "colour": 1})
    fails(doc, "[body.1.colour]")


def test_missing_boundary_lists_choices():
    fails(with_body(boundary=None), "[body.0.boundary]", "is required (a string): one of pec, impedance")


@pytest.mark.parametrize(
    "field,boundary,allowed",
    [("tm", "soft", "pec, impedance"), ("te", "hard", "pec, impedance"),
     ("acoustic", "pec", "soft, hard, impedance")],
)
def test_boundary_not_allowed_for_field(field, boundary, allowed):
    doc = with_body(boundary=boundary)
    doc["wave"]["field"] = field
    fails(doc, "[body.0.boundary]", f"is {boundary!r}; allowed: {allowed}")


@pytest.mark.parametrize(
    "value,fragment",
    [
        (-0.5, "has a negative real part -0.5: the surface would create energy"),
        ([-1.0, 2.0], "has a negative real part -1.0"),
        ("50 ohm", "must be a number or [re, im] (normalised to the medium's wave impedance), got '50 ohm'"),
        ([1.0, 2.0, 3.0], "must be a number or [re, im]"),
        ([1.0, "j"], "must be a number or [re, im]"),
        (True, "must be a number or [re, im]"),
        (None, "must be a number or [re, im]"),
    ],
)
def test_impedance_errors(value, fragment):
    fails(with_body(boundary="impedance", impedance=value), "[body.0.impedance]", fragment)


@pytest.mark.parametrize("field,boundary,value", [("tm", "impedance", 0), ("acoustic", "impedance", [0.0, 0.0])])
def test_zero_impedance_is_refused_where_it_means_a_soft_wall(field, boundary, value):
    doc = with_body(boundary=boundary, impedance=value)
    doc["wave"]["field"] = field
    fails(doc, "[body.0.impedance]", "is zero: use boundary = \"pec\"")


def test_zero_impedance_is_a_pec_wall_for_te():
    # TE: du/dn = j k z u, so z = 0 is the Neumann (PEC) condition and is allowed
    doc = with_body(boundary="impedance", impedance=0.0)
    doc["wave"]["field"] = "te"
    s = parse_case(doc, source=SRC).problem.scatterers[0]
    assert s.impedance == 0


@pytest.mark.parametrize("boundary", ["pec"])
def test_impedance_without_impedance_boundary(boundary):
    fails(with_body(boundary=boundary, impedance=1.0), "[body.0.impedance]",
          'is only allowed with boundary = "impedance"')


def test_purely_reactive_impedance_is_allowed():
    s = parse_case(with_body(boundary="impedance", impedance=[0.0, -2.0]), source=SRC).problem.scatterers[0]
    assert s.impedance == complex(0.0, -2.0)


# ----------------------------------------------------------------- inline shapes


def test_shape_must_be_a_table():
    fails(with_body(shape="circle"), "[body.0.shape]", "must be a table such as")


@pytest.mark.parametrize(
    "shape,key,fragment",
    [
        ({"kind": "star"}, "kind", "is 'star'; allowed: circle, ellipse, rectangle, polygon"),
        ({"radius_m": 1.0}, "kind", "is required (a string): one of circle"),
        ({"kind": "circle"}, "radius_m", "is required (a number)"),
        ({"kind": "circle", "radius_m": -1.0}, "radius_m", "must be positive, got -1.0"),
        ({"kind": "circle", "radius_m": 0}, "radius_m", "must be positive"),
        ({"kind": "circle", "radius_m": "1 kg"}, "radius_m", "must be a finite number"),
        ({"kind": "circle", "radius_m": 1.0, "center_m": [1.0]}, "center_m",
         "must be a pair of finite numbers [x, y] in metres"),
        ({"kind": "circle", "radius_m": 1.0, "center_m": [1.0, float("nan")]}, "center_m",
         "must be a pair of finite numbers"),
        # a circle has no orientation: a rotation is an unknown key for it
        ({"kind": "circle", "radius_m": 1.0, "rotation_deg": 10}, "rotation_deg", "is not a known key here"),
        ({"kind": "circle", "radius_m": 1.0, "colour": 1}, "colour", "is not a known key here"),
        ({"kind": "ellipse"}, "semi_axes_m", "must be two positive numbers [a, b] in metres, got None"),
        ({"kind": "ellipse", "semi_axes_m": [1.0]}, "semi_axes_m", "must be two positive numbers"),
        ({"kind": "ellipse", "semi_axes_m": [1.0, -0.5]}, "semi_axes_m", "must be two positive numbers"),
        ({"kind": "ellipse", "semi_axes_m": [1.0, 0.0]}, "semi_axes_m", "must be two positive numbers"),
        ({"kind": "ellipse", "semi_axes_m": [1.0, 0.5], "rotation_deg": "up"}, "rotation_deg",
         "must be a finite number"),
        ({"kind": "rectangle", "height_m": 1.0}, "width_m", "is required (a number)"),
        ({"kind": "rectangle", "width_m": 1.0, "height_m": -1.0}, "height_m", "must be positive"),
        ({"kind": "rectangle", "width_m": 1.0, "height_m": 0.5, "corner_radius_m": -0.1}, "corner_radius_m",
         "must be between 0 and half the shorter side (0.25), got -0.1"),
        ({"kind": "rectangle", "width_m": 1.0, "height_m": 0.5, "corner_radius_m": 0.3}, "corner_radius_m",
         "must be between 0 and half the shorter side (0.25), got 0.3"),
        ({"kind": "polygon"}, "points_m", "must be a list of at least 3 points [[x, y], ...]"),
        ({"kind": "polygon", "points_m": [[0, 0], [1, 0]]}, "points_m", "at least 3 points"),
        ({"kind": "polygon", "points_m": [[0, 0], [1, 0], [1]]}, "points_m", "at least 3 points"),
        ({"kind": "polygon", "points_m": [[0, 0], [1, 0], [1, "a"]]}, "points_m", "of finite numbers"),
        # a bow tie crosses itself at (0.5, 0.5)
        ({"kind": "polygon", "points_m": [[0, 0], [1, 1], [1, 0], [0, 1]]}, "points_m",
         "does not form a simple polygon (Self-intersection"),
        ({"kind": "polygon", "points_m": [[0, 0], [1, 0], [2, 0]]}, "points_m", "does not form a simple polygon"),
    ],
)
def test_inline_shape_errors(shape, key, fragment):
    fails(with_shape(shape), f"[body.0.shape.{key}]", fragment)


@pytest.mark.parametrize(
    "shape,area",
    [
        ({"kind": "circle", "radius_m": 0.5, "center_m": [2.0, 1.0]}, math.pi * 0.25),
        ({"kind": "ellipse", "semi_axes_m": [2.0, 0.5], "rotation_deg": 30}, math.pi * 1.0),
        ({"kind": "rectangle", "width_m": 2.0, "height_m": 1.0}, 2.0),
        # four quarter-circle corners take (4 - pi) rc^2 off the rectangle
        ({"kind": "rectangle", "width_m": 2.0, "height_m": 1.0, "corner_radius_m": 0.25}, 2.0 - (4 - math.pi) / 16),
        ({"kind": "rectangle", "width_m": 1.0, "height_m": 1.0, "corner_radius_m": 0.5}, math.pi / 4),
        # clockwise input is reoriented; shoelace area of the L is 0.75
        ({"kind": "polygon", "points_m": [[0, 0], [0, 1], [0.5, 1], [0.5, 0.5], [1, 0.5], [1, 0]]}, 0.75),
    ],
)
def test_inline_shape_areas(shape, area):
    body = parse_case(with_shape(shape), source=SRC).problem.scatterers[0].body
    assert body.outer.is_ccw
    assert body.area() == pytest.approx(area, rel=1e-12)
    body.outer.check_closed(1e-12)


def test_inline_shape_center_and_rotation():
    shape = {"kind": "rectangle", "width_m": 2.0, "height_m": 0.5, "center_m": [3.0, -1.0], "rotation_deg": 90}
    box = parse_case(with_shape(shape), source=SRC).problem.scatterers[0].body.outer.bounding_box()
    assert np.allclose(box, (2.75, -2.0, 3.25, 0.0), atol=1e-12)


# ----------------------------------------------------------------- several bodies


def two_bodies(second_center, *, name="d", radius=0.5) -> dict:
    doc = base()
    doc["body"].append({"name": name, "shape": {"kind": "circle", "radius_m": radius, "center_m": second_center},
                        "boundary": "pec"})
    return doc


@pytest.mark.parametrize("center,radius", [([0.8, 0.0], 0.5), ([0.0, 0.0], 0.1), ([0.0, -0.95], 0.5)])
def test_overlapping_or_nested_bodies(center, radius):
    fails(two_bodies(center, radius=radius), "bodies 'c' and 'd' overlap or touch near (",
          "move them apart or merge them into one body")


def test_shallow_overlap_between_sample_points_is_found():
    # Two circles of radius 0.5 whose centres are 0.999 m apart overlap by 1 mm. The contact
    # direction pi/64 falls midway between the sample points of both outlines.
    a = math.pi / 64
    fails(two_bodies([0.999 * math.cos(a), 0.999 * math.sin(a)]), "bodies 'c' and 'd' overlap")


def test_separate_bodies_are_fine():
    p = parse_case(two_bodies([1.2, 0.0]), source=SRC).problem
    assert [s.name for s in p.scatterers] == ["c", "d"]


def test_duplicate_body_names():
    fails(two_bodies([3.0, 0.0], name="c"), "[body]", "names must differ, got ['c', 'c']")


def test_default_body_names():
    doc = two_bodies([3.0, 0.0])
    for b in doc["body"]:
        del b["name"]
    assert [s.name for s in parse_case(doc, source=SRC).problem.scatterers] == ["body1", "body2"]


# ----------------------------------------------------------------- [geometry]


@pytest.mark.parametrize(
    "table,key,fragment",
    [
        ({}, "file", "is required (a string)"),
        ({"file": 3}, "file", "must be a string"),
        ({"file": "part.dxf", "units": 1}, "units", "must be a string"),
        ({"file": "part.dxf", "gap_tol_m": -1e-6}, "gap_tol_m", "must be positive"),
        ({"file": "part.dxf", "colour": 1}, "colour", "is not a known key here"),
    ],
)
def test_geometry_errors(table, key, fragment):
    fails(base(geometry=table), f"[geometry.{key}]", fragment)


def test_missing_drawing_names_the_path(tmp_path):
    from sectionwave.importers.errors import SectionwaveError

    # the message names the case file, the key and the drawing, resolved beside the case
    with pytest.raises(SectionwaveError, match="does not exist") as info:
        parse_case(base(geometry={"file": "absent.dxf"}), source=SRC, base_dir=tmp_path)
    assert str(tmp_path / "absent.dxf") in str(info.value)
    assert str(info.value).startswith(f"{SRC}: [geometry.file]")


def box_with_cavity(tmp_path) -> dict:
    """A 1 m square on layer BOX with a closed 0.2 m square cavity in its middle (DXF in metres)."""
    import ezdxf

    drawing = ezdxf.new()
    drawing.header["$INSUNITS"] = 6  # metres
    msp = drawing.modelspace()
    msp.add_lwpolyline([(0, 0), (1, 0), (1, 1), (0, 1)], close=True, dxfattribs={"layer": "BOX"})
    msp.add_lwpolyline([(0.4, 0.4), (0.6, 0.4), (0.6, 0.6), (0.4, 0.6)], close=True, dxfattribs={"layer": "BOX"})
    drawing.saveas(tmp_path / "box.dxf")
    return base(geometry={"file": "box.dxf"}, body=[{"name": "box", "layer": "BOX", "boundary": "pec"}])


def test_body_with_a_cavity_is_noted(tmp_path):
    case = parse_case(box_with_cavity(tmp_path), source=SRC, base_dir=tmp_path)
    s = case.problem.scatterers[0]
    assert (s.name, s.source, len(s.body.holes)) == ("box", "layer BOX", 1)
    assert s.body.area() == pytest.approx(1.0 - 0.04, rel=1e-12)
    assert case.output.notes == ("body 'box' has 1 hole(s): closed cavities of an impenetrable body do not "
                                 "affect the exterior field and are not meshed",)
    assert case.output.drawing_audit["units"] == "m"
    assert case.output.drawing_audit["file"] == str(tmp_path / "box.dxf")


def test_line_source_in_a_cavity_is_refused(tmp_path):
    doc = box_with_cavity(tmp_path)
    doc["incident"] = [{"kind": "line", "position_m": [0.5, 0.5]}]
    fails(doc, "[incident.0.position_m]", "is inside body 'box'", base_dir=tmp_path)


@pytest.mark.parametrize(
    "name,table,wanted",
    [
        ("geometry", {"file": "part.dxf", "unit": "mm"}, ("units", "gap_tol_m")),
        ("near_field", {"probes_csv": "p.csv", "spacing": 0.1}, ("spacing_m", "x_m", "from_deg")),
    ],
)
def test_unknown_key_message_lists_every_allowed_key(tmp_path, name, table, wanted):
    (tmp_path / "p.csv").write_text("x_m,y_m\n5,5\n", encoding="utf-8")
    msg = fails(base(**{name: table}), "is not a known key here", base_dir=tmp_path)
    for key in wanted:
        assert key in msg.split("known keys:")[1]


# ----------------------------------------------------------------- [[incident]]


def test_incident_must_be_tables():
    fails(base(incident={"kind": "plane"}), "[incident]", "must be an array of tables [[incident]]")


def test_incident_empty():
    fails(base(incident=[]), "[incident]", "is empty: give at least one [[incident]] wave")


@pytest.mark.parametrize(
    "inc,key,fragment",
    [
        ({"kind": "spherical"}, "kind", "is 'spherical'; allowed: plane, line"),
        ({"kind": "plane"}, "from_deg", "is required: a number, a list"),
        ({"kind": "plane", "from_deg": [0, 90, 0]}, "from_deg", "repeats an angle: [0.0, 90.0, 0.0]"),
        ({"kind": "plane", "from_deg": {"start": 0, "stop": 0, "count": 2}}, "from_deg", "repeats an angle"),
        ({"kind": "plane", "from_deg": "north"}, "from_deg", "must hold finite numbers"),
        ({"kind": "plane", "from_deg": 0, "position_m": [1, 1]}, "position_m", "is not a known key here"),
        ({"kind": "line"}, "position_m", "must be a pair of finite numbers [x, y] in metres, got None"),
        ({"kind": "line", "position_m": [1.0, 2.0], "from_deg": 0}, "from_deg", "is not a known key here"),
        ({"kind": "line", "position_m": [0.1, 0.2]}, "position_m",
         "[0.1, 0.2] m is inside body 'c'; a line source must be outside every body"),
        ({"kind": "plane", "from_deg": 0, "name": 3}, "name", "must be a string"),
    ],
)
def test_incident_errors(inc, key, fragment):
    fails(base(incident=[{"kind": "plane", "from_deg": 10.0}, inc]), f"[incident.1.{key}]", fragment)


def test_line_source_just_inside_a_curved_surface_is_refused():
    # 0.3 mm inside the 0.5 m circle, midway between two of its sample points
    a = math.pi / 64
    pos = [0.4997 * math.cos(a), 0.4997 * math.sin(a)]
    fails(base(incident=[{"kind": "line", "position_m": pos}]), "[incident.0.position_m]", "is inside body 'c'")


def test_duplicate_incident_names():
    incs = [{"name": "a", "from_deg": 0.0}, {"name": "a", "from_deg": 90.0}]
    fails(base(incident=incs), "[incident]", "names must differ, got ['a', 'a']")


def test_same_angle_in_two_groups_is_allowed():
    # only a repeat within one from_deg list is an error; two named groups may share an angle
    incs = [{"name": "a", "from_deg": 0.0}, {"name": "b", "from_deg": 0.0}]
    p = parse_case(base(incident=incs), source=SRC).problem
    assert [w.name for w in p.incidents] == ["a", "b"]


# ----------------------------------------------------------------- [far_field], [solver], [output]


@pytest.mark.parametrize(
    "table,fragment",
    [
        ({"angles_deg": "all"}, "must hold finite numbers"),
        ({"angles_deg": []}, "is an empty list"),
        ({"angles_deg": {"start": 0, "stop": 360}}, "a range needs exactly start, stop and count"),
        ({"angles_deg": 0, "step": 1}, "is not a known key here"),
    ],
)
def test_far_field_errors(table, fragment):
    key = "step" if "step" in table else "angles_deg"
    fails(base(far_field=table), f"[far_field.{key}]", fragment)


@pytest.mark.parametrize(
    "key,value,fragment",
    [
        ("tolerance", 0.0, "must be positive"),
        ("tolerance", -1e-8, "must be positive"),
        ("tolerance", 0.1, "must be between 1e-14 and 1e-2, got 0.1"),
        ("tolerance", 1e-15, "must be between 1e-14 and 1e-2"),
        ("tolerance", "fine", "must be a finite number, got 'fine'"),
        ("nodes_per_panel", 3, "must be an integer from 4 to 32, got 3"),
        ("nodes_per_panel", 33, "must be an integer from 4 to 32"),
        ("nodes_per_panel", 16.0, "must be an integer from 4 to 32, got 16.0"),
        ("nodes_per_panel", True, "must be an integer from 4 to 32, got True"),
        ("max_refinements", -1, "must be an integer from 0 to 20, got -1"),
        ("max_refinements", 21, "must be an integer from 0 to 20"),
        ("max_refinements", 2.5, "must be an integer from 0 to 20"),
        ("max_refinements", False, "must be an integer from 0 to 20, got False"),
        ("max_panel_wavelengths", 0, "must be positive"),
        ("max_panel_wavelengths", "auto", "must be a finite number"),
        ("colour", 1, "is not a known key here"),
    ],
)
def test_solver_errors(key, value, fragment):
    fails(base(solver={key: value}), f"[solver.{key}]", fragment)


@pytest.mark.parametrize("tol", [1e-14, 1e-2])
def test_solver_tolerance_ends_are_included(tol):
    assert parse_case(base(solver={"tolerance": tol}), source=SRC).problem.solver.tolerance == tol


@pytest.mark.parametrize(
    "key,value,fragment",
    [
        ("plots", "yes", "must be true or false, got 'yes'"),
        ("vtk", 1, "must be true or false, got 1"),
        ("time_convention", "other", "is 'other'; allowed: engineering, physics"),
        ("time_convention", 1, "must be a string"),
        ("csv", True, "is not a known key here"),
    ],
)
def test_output_errors(key, value, fragment):
    fails(base(output={key: value}), f"[output.{key}]", fragment)


# ----------------------------------------------------------------- [near_field]


GRID = {"x_m": [-2.0, 2.0], "y_m": [-1.0, 1.0], "count": [5, 3]}


@pytest.mark.parametrize(
    "table,key,fragment",
    [
        ({"x_m": [-1, 1], "count": [2, 2]}, "y_m", "must be a pair of finite numbers"),
        ({"y_m": [-1, 1], "count": [2, 2]}, "x_m", "must be a pair of finite numbers"),
        ({"x_m": [1, -1], "y_m": [-1, 1], "count": [2, 2]}, "x_m", "must be [min, max] with min < max"),
        ({"x_m": [-1, 1], "y_m": [-1, 1]}, "spacing_m", "give exactly one of spacing_m = number or count = [nx, ny]"),
        ({"x_m": [-1, 1], "y_m": [-1, 1], "count": [2, 2], "spacing_m": 0.1}, "spacing_m", "give exactly one of"),
        ({"x_m": [-1, 1], "y_m": [-1, 1], "spacing_m": -0.1}, "spacing_m", "must be positive"),
        ({"x_m": [-1, 1], "y_m": [-1, 1], "count": [0, 3]}, "count", "must be [nx, ny] positive integers, got [0, 3]"),
        ({"x_m": [-1, 1], "y_m": [-1, 1], "count": [3]}, "count", "must be [nx, ny] positive integers"),
        ({"x_m": [-1, 1], "y_m": [-1, 1], "count": [2.5, 3]}, "count", "must be [nx, ny] positive integers"),
        ({"x_m": [-1, 1], "y_m": [-1, 1], "count": [True, 3]}, "count", "must be [nx, ny] positive integers"),
        ({"x_m": [-1, 1], "y_m": [-1, 1], "spacing_m": 1e-4}, "spacing_m", "asks for 20001 x 20001 points; at most 25 million"),
        ({}, "x_m", "give a grid (x_m, y_m, spacing_m or count) or probes_csv"),
        ({"from_deg": 0}, "x_m", "give a grid"),
        ({**GRID, "colour": 1}, "colour", "is not a known key here"),
        ({**GRID, "from_deg": [0, "x"]}, "from_deg", "must hold finite numbers"),
    ],
)
def test_near_field_errors(table, key, fragment):
    fails(base(near_field=table), f"[near_field.{key}]", fragment)


@pytest.mark.parametrize(
    "table,key,fragment",
    [
        ({"x_m": [-1, 1], "y_m": [1, 1], "count": [2, 2]}, "y_m", "min < max"),
        ({"x_m": [-1, 1], "y_m": [-1, 1], "count": [6000, 6000]}, "count", "at most 25 million"),
    ],
)
def test_near_field_errors_name_the_key_the_user_wrote(table, key, fragment):
    fails(base(near_field=table), f"[near_field.{key}]", fragment)


def test_near_field_from_deg_matching_no_plane_wave():
    incs = [{"name": "p", "from_deg": [0.0, 90.0]}, {"name": "ls", "kind": "line", "position_m": [3.0, 0.0]}]
    fails(base(incident=incs, near_field={**GRID, "from_deg": [90.0, 45.0]}),
          "[near_field.from_deg] [45.0] matches no plane-wave incidence", "use angles listed in [[incident]] from_deg")


@pytest.mark.parametrize(
    "text,fragment",
    [
        ("x,y\n1,2\n", "the first line must be the header x_m,y_m"),
        ("", "the first line must be the header x_m,y_m"),
        ("x_m,y_m\n", "holds no points"),
        ("x_m,y_m\n1,2\n3\n", "line 3: expected two numbers, got ['3']"),
        ("x_m,y_m\n1,2\n3,four\n", "line 3: expected two numbers, got ['3', 'four']"),
    ],
)
def test_probe_file_errors(tmp_path, text, fragment):
    (tmp_path / "probes.csv").write_text(text, encoding="utf-8")
    msg = fails(base(near_field={"probes_csv": "probes.csv"}), "[near_field.probes_csv]", fragment,
                base_dir=tmp_path)
    if "header" in fragment or "no points" in fragment:
        assert str(tmp_path / "probes.csv") in msg


def test_probe_file_missing(tmp_path):
    fails(base(near_field={"probes_csv": "none.csv"}), "[near_field.probes_csv]", "cannot be read:",
          str(tmp_path / "none.csv"), base_dir=tmp_path)


def test_probe_file_must_be_a_string(tmp_path):
    fails(base(near_field={"probes_csv": 3}), "[near_field.probes_csv]", "must be a string", base_dir=tmp_path)


def test_probe_file_is_read_relative_to_the_case(tmp_path):
    (tmp_path / "p.csv").write_text("# probes\nx_m, y_m\n2.0,0.0\n# a comment\n0,-3.5\n", encoding="utf-8")
    req = parse_case(base(near_field={"probes_csv": "p.csv"}), source=SRC, base_dir=tmp_path).problem.near_field
    assert req is not None and req.x_m is None and req.y_m is None
    assert np.array_equal(req.probes_m, [[2.0, 0.0], [0.0, -3.5]])


# ----------------------------------------------------------------- the happy path


def full_case() -> dict:
    return {
        "title": "Two cylinders",
        "wave": {"field": "tm", "frequency_hz": {"start": 1e9, "stop": 3e9, "count": 3}},
        "body": [
            {"name": "pec", "shape": {"kind": "circle", "radius_m": 0.1}, "boundary": "pec"},
            {"name": "coated", "shape": {"kind": "ellipse", "semi_axes_m": [0.2, 0.1], "center_m": [1.0, 0.0]},
             "boundary": "impedance", "impedance": [0.5, -0.25]},
        ],
        "incident": [
            {"name": "sweep", "kind": "plane", "from_deg": {"start": 0, "stop": 90, "count": 3}},
            {"name": "lamp", "kind": "line", "position_m": [0.0, 2.0]},
            {"name": "back", "from_deg": 180},
        ],
        "far_field": {"angles_deg": [0, 90.5, 180]},
        "near_field": {"x_m": [-1.0, 2.0], "y_m": [-0.5, 0.5], "spacing_m": 0.25, "from_deg": [45, 180]},
        "solver": {"tolerance": 1e-6, "nodes_per_panel": 12, "max_panel_wavelengths": 0.5, "max_refinements": 3},
        "output": {"time_convention": "physics", "plots": False, "vtk": False},
    }


def test_full_case_problem():
    p = parse_case(full_case(), source=SRC).problem
    assert p.field == "tm"
    assert p.medium == Medium(SPEED_OF_LIGHT_M_S, 0.0)
    assert p.frequencies_hz == (1e9, 2e9, 3e9)
    assert all(isinstance(f, float) for f in p.frequencies_hz)
    # k = 2 pi f / c0 (SI exact c0)
    assert p.wavenumber(1e9) == pytest.approx(2 * math.pi * 1e9 / 299_792_458.0, rel=1e-15)
    assert p.wavelength(3e9) == pytest.approx(299_792_458.0 / 3e9, rel=1e-15)
    pec, coated = p.scatterers
    assert (pec.name, pec.boundary, pec.impedance, pec.source) == ("pec", "pec", None, "inline shape")
    assert (coated.boundary, coated.impedance) == ("impedance", complex(0.5, -0.25))
    assert coated.body.name == "coated"
    assert coated.body.area() == pytest.approx(math.pi * 0.02, rel=1e-12)
    assert np.array_equal(p.far_field_deg, [0.0, 90.5, 180.0])


def test_full_case_incidents_expand_per_angle():
    p = parse_case(full_case(), source=SRC).problem
    _same_incidents(p.incidents)
    assert p.plane_waves == [0, 1, 2, 4]
    assert p.incidents[3].label() == "lamp" and math.isnan(p.incidents[3].from_deg)
    assert p.incidents[1].label() == "from 45 deg"


def _same_incidents(waves) -> None:
    # IncidentWave holds a NaN angle for line sources, and NaN != NaN: compare field by field
    want = [("sweep", "plane", 0.0, None), ("sweep", "plane", 45.0, None), ("sweep", "plane", 90.0, None),
            ("lamp", "line", None, (0.0, 2.0)), ("back", "plane", 180.0, None)]
    for w, (name, kind, deg, pos) in zip(waves, want, strict=True):
        assert (w.name, w.kind, w.position_m) == (name, kind, pos)
        assert math.isnan(w.from_deg) if deg is None else w.from_deg == deg


def test_full_case_near_field_request():
    req = parse_case(full_case(), source=SRC).problem.near_field
    assert req is not None
    assert req.incidents == (1, 4)  # the plane waves from 45 and 180 degrees
    assert np.allclose(req.x_m, np.arange(13) * 0.25 - 1.0, atol=1e-15)
    assert np.allclose(req.y_m, [-0.5, -0.25, 0.0, 0.25, 0.5], atol=1e-15)
    assert req.probes_m is None


def test_full_case_solver_and_output():
    case = parse_case(full_case(), source=SRC)
    s = case.problem.solver
    assert (s.tolerance, s.nodes_per_panel, s.max_panel_wavelengths, s.max_refinements) == (1e-6, 12, 0.5, 3)
    o = case.output
    assert (o.time_convention, o.plots, o.vtk, o.title, o.case) == ("physics", False, False, "Two cylinders", SRC)
    assert o.drawing_audit is None and o.notes == ()


def test_defaults():
    doc = base()
    del doc["incident"], doc["title"]
    case = parse_case(doc)
    p = case.problem
    assert p.incidents == (IncidentWave("incident1", "plane", from_deg=0.0),)
    assert np.array_equal(p.far_field_deg, np.linspace(0.0, 360.0, 721))
    assert p.near_field is None
    s = p.solver
    assert (s.tolerance, s.nodes_per_panel, s.max_panel_wavelengths, s.max_refinements) == (1e-8, 16, None, 10)
    o = case.output
    assert (o.time_convention, o.plots, o.vtk, o.title, o.case) == ("engineering", True, True, "untitled", "<case>")


def test_near_field_defaults_to_every_incident_and_count_grid():
    incs = [{"name": "p", "from_deg": [0.0, 90.0]}, {"name": "ls", "kind": "line", "position_m": [3.0, 0.0]}]
    req = parse_case(base(incident=incs, near_field=GRID), source=SRC).problem.near_field
    assert req.incidents == (0, 1, 2)
    assert np.array_equal(req.x_m, np.linspace(-2, 2, 5)) and np.array_equal(req.y_m, [-1.0, 0.0, 1.0])


def test_acoustic_medium():
    doc = with_body(boundary="hard")
    doc["wave"]["field"] = "acoustic"
    assert parse_case(doc).problem.medium == Medium(343.0, 1.204)
    doc["wave"].update(sound_speed_m_s=1500, density_kg_m3=1000)
    p = parse_case(doc).problem
    assert p.medium == Medium(1500.0, 1000.0)
    assert p.wavelength(1500.0) == 1.0
    assert p.scatterers[0].boundary == "hard"


def test_impedance_given_as_a_number():
    s = parse_case(with_body(boundary="impedance", impedance=2), source=SRC).problem.scatterers[0]
    assert s.impedance == 2 + 0j and isinstance(s.impedance, complex)


def test_parse_does_not_change_the_document():
    doc = full_case()
    before = copy.deepcopy(doc)
    parse_case(doc)
    assert doc == before


# ----------------------------------------------------------------- the Problem's own checks


def test_problem_rejects_inconsistent_values():
    good = parse_case(base()).problem
    s = good.scatterers[0]
    with pytest.raises(ProblemError, match="unknown field kind 'xray'"):
        Problem("xray", good.medium, good.scatterers, good.incidents, (1e9,))  # type: ignore[arg-type]
    with pytest.raises(ProblemError, match="at least one body"):
        Problem("tm", good.medium, (), good.incidents, (1e9,))
    with pytest.raises(ProblemError, match="at least one incident wave"):
        Problem("tm", good.medium, good.scatterers, (), (1e9,))
    with pytest.raises(ProblemError, match="positive and finite"):
        Problem("tm", good.medium, good.scatterers, good.incidents, (1e9, math.inf))
    with pytest.raises(ProblemError, match="'soft' is not available for tm; allowed: pec, impedance"):
        Problem("tm", good.medium, (Scatterer("c", s.body, "soft"),), good.incidents, (1e9,))
    with pytest.raises(ProblemError, match="exactly for impedance boundaries"):
        Problem("tm", good.medium, (Scatterer("c", s.body, "impedance"),), good.incidents, (1e9,))


# ----------------------------------------------------------------- load_case: files


def test_load_case_reads_a_file_and_resolves_probes(tmp_path):
    (tmp_path / "p.csv").write_text("x_m,y_m\n5,5\n", encoding="utf-8")
    path = tmp_path / "c.toml"
    path.write_text(
        'title = "file"\n[wave]\nfield = "te"\nfrequency_hz = [1e9, 2e9]\n'
        '[[body]]\nname = "c"\nshape = { kind = "circle", radius_m = 0.5 }\nboundary = "pec"\n'
        "[near_field]\nprobes_csv = \"p.csv\"\n",
        encoding="utf-8",
    )
    case = load_case(path)
    assert case.output.case == str(path) and case.output.title == "file"
    assert case.problem.field == "te" and case.problem.frequencies_hz == (1e9, 2e9)
    assert np.array_equal(case.problem.near_field.probes_m, [[5.0, 5.0]])


def test_load_case_missing_file(tmp_path):
    path = tmp_path / "absent.toml"
    with pytest.raises(CaseError, match=r"absent\.toml: cannot read the case file \(No such file"):
        load_case(path)


def test_load_case_invalid_toml(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text("[wave\nfield = 'tm'\n", encoding="utf-8")
    with pytest.raises(CaseError) as info:
        load_case(path)
    assert str(info.value).startswith(f"{path}: invalid TOML: ")


def test_load_case_not_utf8(tmp_path):
    path = tmp_path / "latin.toml"
    path.write_bytes(b'title = "caf\xe9"\n')  # Latin-1 e-acute at byte 12
    with pytest.raises(CaseError, match=r"latin\.toml: not UTF-8 text \(byte 12\)"):
        load_case(path)


def test_load_case_validation_errors_name_the_file(tmp_path):
    path = tmp_path / "c.toml"
    path.write_text('[wave]\nfield = "tm"\nfrequency_hz = 1e9\n[solver]\ntolerance = 0.5\n', encoding="utf-8")
    with pytest.raises(CaseError, match=rf"^{path}: \[body\] is required"):
        load_case(path)
    path.write_text(path.read_text() + '[[body]]\nshape = { kind = "circle", radius_m = 1 }\nboundary = "pec"\n')
    with pytest.raises(CaseError, match=rf"^{path}: \[solver\.tolerance\] must be between"):
        load_case(path)


def test_load_case_from_standard_input(monkeypatch):
    text = '[wave]\nfield = "tm"\nfrequency_hz = 1e9\n[[body]]\nshape = { kind = "circle", radius_m = 1 }\nboundary = "pec"\n'
    monkeypatch.setattr(sys, "stdin", io.TextIOWrapper(io.BytesIO(text.encode())))
    case = load_case("-")
    assert case.output.case == "<stdin>"
    monkeypatch.setattr(sys, "stdin", io.TextIOWrapper(io.BytesIO(b"[wave]\nfield = 'tm'\n")))
    with pytest.raises(CaseError, match=r"^<stdin>: \[wave\.frequency_hz\] is required"):
        load_case("-")
