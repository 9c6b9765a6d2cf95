"""A drawn circle solved end to end matches the series solution (Balanis ch. 11)."""

from __future__ import annotations

import math
from pathlib import Path

import ezdxf
import numpy as np
import pytest
from sectionwave.engine import parse_case, solve_problem

from tests.reference import C0, circle_far_field, relative_error


@pytest.mark.parametrize("how", ["circle_mm", "bulge_inch"])
def test_dxf_circle_matches_series(tmp_path, how):
    doc = ezdxf.new()
    msp = doc.modelspace()
    if how == "circle_mm":
        doc.header["$INSUNITS"] = 4  # millimetres
        msp.add_circle((10.0, 0.0), 50.0, dxfattribs={"layer": "POST"})
        radius, center = 0.05, (0.01, 0.0)
    else:
        doc.header["$INSUNITS"] = 1  # inches: two half-circle bulges, radius 2 in
        msp.add_lwpolyline([(0, -2, 1.0), (0, 2, 1.0)], format="xyb", close=True, dxfattribs={"layer": "POST"})
        radius, center = 2 * 0.0254, (0.0, 0.0)
    path = tmp_path / "post.dxf"
    doc.saveas(path)
    ka = 5.0
    k = ka / radius
    case = {
        "wave": {"field": "tm", "frequency_hz": k * C0 / (2 * math.pi)},
        "geometry": {"file": str(path)},
        "body": [{"name": "post", "layer": "POST", "boundary": "pec"}],
        "incident": [{"kind": "plane", "from_deg": 10.0}],
        "output": {"plots": False, "vtk": False},
    }
    fr = solve_problem(parse_case(case, base_dir=tmp_path).problem).frequencies[0]
    ref = circle_far_field(ka, k, fr.angles_deg, 10.0, "dirichlet", center=center)
    assert relative_error(fr.farfield[:, 0], ref) < 1e-8


def test_bodies_picked_by_layer_or_point_from_sample_drawings():
    from sectionwave.engine import CaseError

    samples = Path(__file__).resolve().parents[1] / "samples"
    base = {"wave": {"field": "te", "frequency_hz": 1e9}, "output": {"plots": False}}
    by_layer = parse_case({**base, "geometry": {"file": "drawings/ribbed_mast.dxf"},
                           "body": [{"name": "m", "layer": "MAST", "boundary": "pec"}]}, base_dir=samples)
    body = by_layer.problem.scatterers[0].body
    # the sample's section (samples/drawings/make_samples.py): 70 mm across, two holes
    # (cable ducts) inside the outline, so the metal is less than the outline's area
    assert len(body.holes) == 2
    assert 0 < body.area() < body.outer.signed_area()
    xmin, ymin, xmax, ymax = body.outer.bounding_box()
    assert xmax - xmin == pytest.approx(0.070, rel=1e-6)
    strut = parse_case({**base, "geometry": {"file": "drawings/strut.svg"},
                        "body": [{"name": "s", "point_m": [0.02, 0.02], "boundary": "pec"}]}, base_dir=samples)
    assert strut.problem.scatterers[0].body.outer.is_ccw
    with pytest.raises(CaseError, match="not inside any body"):
        parse_case({**base, "geometry": {"file": "drawings/strut.svg"},
                    "body": [{"name": "s", "point_m": [5.0, 5.0], "boundary": "pec"}]}, base_dir=samples)
    with pytest.raises(CaseError, match="NOPE"):
        parse_case({**base, "geometry": {"file": "drawings/ribbed_mast.dxf"},
                    "body": [{"name": "m", "layer": "NOPE", "boundary": "pec"}]}, base_dir=samples)


def test_fairing_sample_meets_its_tolerance():
    # The demo's penetrable sample: a PEC mast inside a lossy fairing. The absorbed
    # power two ways (C_ext - C_s by the 2D optical theorem, and the flux into the
    # fairing) must agree (energy conservation; Colton & Kress, ch. 3, from memory).
    from sectionwave.engine import load_case

    samples = Path(__file__).resolve().parents[1] / "samples"
    fr = solve_problem(load_case(samples / "fairing_mast.toml").problem).frequencies[0]
    assert fr.estimated_error < 1e-8
    w = fr.cross_sections
    assert np.all(w.absorption_width_m > 0)
    assert np.max(w.optical_residual) < 1e-8
    grid = fr.near_field.grid
    # inside the fairing the field is computed; only the PEC mast is masked
    assert grid.inside.any() and np.isfinite(grid.total[~grid.inside]).all()
