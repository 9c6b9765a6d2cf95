"""Penetrable and layered bodies against series solutions and exact identities.

References: the layered circular cylinder, matched at every interface
(tests/reference.py, layered_circle_coefficients; Balanis, Advanced
Engineering Electromagnetics, ch. 11; Bowman, Senior & Uslenghi,
Electromagnetic and Acoustic Scattering by Simple Shapes, ch. 2, from
memory), the 2D optical theorem (energy conservation for lossless bodies)
and reciprocity (Colton & Kress, Inverse Acoustic and Electromagnetic
Scattering Theory, ch. 3, from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.special as sp
from sectionwave.engine import CaseError, parse_case, solve_problem

from tests.reference import (
    C0,
    SQUARE,
    case,
    coefficients_far_field,
    layered_circle_coefficients,
    relative_error,
)

FROM = 30.0


def _run(field, k, bodies, *, wave=None, solver=None, near=None, angles=None):
    doc = case(field, k * (wave or {}).get("sound_speed_m_s", C0) / (2 * math.pi), bodies, from_deg=FROM,
               solver=solver, angles=angles)
    if wave:
        doc["wave"].update(wave)
    if near:
        doc["near_field"] = near
    return solve_problem(parse_case(doc).problem).frequencies[0]


def _circle(radius, **body):
    return {"name": body.pop("name", "d"), "shape": {"kind": "circle", "radius_m": radius}, **body}


def _beta(field, eps):
    return 1.0 if field == "tm" else 1.0 / eps


@pytest.mark.parametrize("field", ["tm", "te"])
@pytest.mark.parametrize("eps,ka", [(2.0, 3.0), (4.0, 2.0), (10.0, 5.0), (4.0 - 0.6j, 4.0)])
def test_dielectric_circle_matches_series(field, eps, ka):
    eps = complex(eps)
    fr = _run(field, ka, [_circle(1.0, boundary="penetrable", eps_r=[eps.real, eps.imag])])
    k1 = ka * np.sqrt(eps)
    n, c, _ = layered_circle_coefficients(ka, 1.0, [(1.0, k1, _beta(field, eps))], "medium", int(2 * ka + 40))
    ref = coefficients_far_field(n, c, ka, fr.angles_deg, FROM)
    assert relative_error(fr.farfield[:, 0], ref) < 1e-8
    w = fr.cross_sections
    if eps.imag == 0:
        # lossless: energy is conserved (optical theorem), absorption vanishes
        assert w.optical_residual[0] < 1e-9
        assert abs(w.absorption_width_m[0]) < 1e-9 * w.extinction_width_m[0]
    else:
        # lossy: C_ext - C_s equals the power flowing in through the surface
        assert w.absorption_width_m[0] > 0
        assert abs(w.absorption_width_m[0] - w.surface_absorption_m[0]) < 1e-8 * w.extinction_width_m[0]


@pytest.mark.slow
def test_high_contrast_large_dielectric_circle():
    # eps_r = 10 at ka = 20: 63 interior wavelengths around
    ka, eps = 20.0, 10.0
    fr = _run("tm", ka, [_circle(1.0, boundary="penetrable", eps_r=eps)])
    n, c, _ = layered_circle_coefficients(ka, 1.0, [(1.0, ka * math.sqrt(eps), 1.0)], "medium", 100)
    assert relative_error(fr.farfield[:, 0], coefficients_far_field(n, c, ka, fr.angles_deg, FROM)) < 1e-8


@pytest.mark.parametrize("field", ["tm", "te"])
def test_interior_resonance_of_the_disc(field):
    # k1 a = j01 (DLMF table 10.21): the interior Dirichlet problem of the disc is
    # resonant, which breaks naive single-region formulations.
    eps = 4.0
    ka = 2.404825557695773 / 2.0
    fr = _run(field, ka, [_circle(1.0, boundary="penetrable", eps_r=eps)])
    n, c, _ = layered_circle_coefficients(ka, 1.0, [(1.0, 2 * ka, _beta(field, eps))], "medium", 40)
    assert relative_error(fr.farfield[:, 0], coefficients_far_field(n, c, ka, fr.angles_deg, FROM)) < 1e-8


@pytest.mark.parametrize("field", ["tm", "te"])
def test_coated_pec_cylinder(field):
    # PEC core (radius 0.6) under a lossy coating (radius 1): layered series
    eps, ka = 3.0 - 0.2j, 3.0
    bodies = [_circle(1.0, name="coat", boundary="penetrable", eps_r=[eps.real, eps.imag]),
              _circle(0.6, name="core", boundary="pec")]
    fr = _run(field, ka, bodies)
    core = "dirichlet" if field == "tm" else "neumann"
    n, c, _ = layered_circle_coefficients(ka, 1.0, [(1.0, ka * np.sqrt(eps), _beta(field, eps))], core, 50,
                                          core_radius=0.6)
    assert relative_error(fr.farfield[:, 0], coefficients_far_field(n, c, ka, fr.angles_deg, FROM)) < 1e-8
    w = fr.cross_sections
    assert abs(w.absorption_width_m[0] - w.surface_absorption_m[0]) < 1e-8 * w.extinction_width_m[0]


@pytest.mark.parametrize("field", ["tm", "te"])
def test_two_layer_coating(field):
    ka = 4.0
    bodies = [_circle(1.0, name="outer", boundary="penetrable", eps_r=2.0),
              _circle(0.7, name="middle", boundary="penetrable", eps_r=5.0),
              _circle(0.4, name="core", boundary="pec")]
    fr = _run(field, ka, bodies)
    layers = [(0.7, ka * math.sqrt(5.0), _beta(field, 5.0)), (1.0, ka * math.sqrt(2.0), _beta(field, 2.0))]
    core = "dirichlet" if field == "tm" else "neumann"
    n, c, _ = layered_circle_coefficients(ka, 1.0, layers, core, 50, core_radius=0.4)
    assert relative_error(fr.farfield[:, 0], coefficients_far_field(n, c, ka, fr.angles_deg, FROM)) < 1e-8


def test_shell_of_the_surrounding_medium_is_invisible():
    # A "coating" with eps_r = 1 must reproduce the bare PEC core (series of the core alone).
    ka = 3.0
    bodies = [_circle(1.0, name="air", boundary="penetrable", eps_r=1.0), _circle(0.6, name="core", boundary="pec")]
    fr = _run("tm", ka, bodies)
    n, c, _ = layered_circle_coefficients(ka, 1.0, [(1.0, ka, 1.0)], "dirichlet", 40, core_radius=0.6)
    from tests.reference import circle_far_field

    bare = circle_far_field(0.6 * ka, ka, fr.angles_deg, FROM, "dirichlet")
    assert relative_error(fr.farfield[:, 0], bare) < 1e-8
    assert relative_error(coefficients_far_field(n, c, ka, fr.angles_deg, FROM), bare) < 1e-12


def test_dielectric_tube_from_a_drawing(tmp_path):
    # A tube drawn as two CIRCLE entities on one layer: one body with a hole, filled
    # with the surrounding medium again (a three-layer series: air, dielectric, air).
    ezdxf = pytest.importorskip("ezdxf")
    doc = ezdxf.new()
    doc.header["$INSUNITS"] = 6  # metres
    msp = doc.modelspace()
    msp.add_circle((0, 0), 1.0, dxfattribs={"layer": "TUBE"})
    msp.add_circle((0, 0), 0.55, dxfattribs={"layer": "TUBE"})
    doc.saveas(tmp_path / "tube.dxf")
    ka, eps = 3.0, 4.0
    body = {"name": "tube", "layer": "TUBE", "boundary": "penetrable", "eps_r": eps}
    doc_case = case("te", ka * C0 / (2 * math.pi), [body], from_deg=FROM)
    doc_case["geometry"] = {"file": "tube.dxf"}
    fr = solve_problem(parse_case(doc_case, base_dir=tmp_path).problem).frequencies[0]
    layers = [(0.55, ka, 1.0), (1.0, 2 * ka, 0.25)]
    n, c, _ = layered_circle_coefficients(ka, 1.0, layers, "medium", 40)
    assert relative_error(fr.farfield[:, 0], coefficients_far_field(n, c, ka, fr.angles_deg, FROM)) < 1e-8


def test_acoustic_fluid_cylinder():
    # A fluid cylinder (c = 1000 m/s, rho = 900) in sea water: u = p and (1/rho) dp/dn continuous.
    c0, rho0, ka = 1500.0, 1025.0, 5.0
    wave = {"sound_speed_m_s": c0, "density_kg_m3": rho0}
    fr = _run("acoustic", ka, [_circle(1.0, boundary="penetrable", sound_speed_m_s=1000.0, density_kg_m3=900.0)],
              wave=wave)
    n, c, _ = layered_circle_coefficients(ka, 1 / rho0, [(1.0, ka * c0 / 1000.0, 1 / 900.0)], "medium", 50)
    assert relative_error(fr.farfield[:, 0], coefficients_far_field(n, c, ka, fr.angles_deg, FROM)) < 1e-8
    assert fr.cross_sections.optical_residual[0] < 1e-9


@pytest.mark.parametrize("field", ["tm", "te"])
def test_near_field_inside_and_outside(field, tmp_path):
    # Points 1e-3 wavelengths from the interface on both sides, against the series.
    ka, eps = 3.0, 4.0
    lam = 2 * math.pi / ka
    phi = np.linspace(0.0, 2 * math.pi, 25)[:-1] + 0.01
    rings = [1.0 + 1e-3 * lam, 1.0 - 1e-3 * lam, 0.5, 2.0]
    pts = np.vstack([np.column_stack([r * np.cos(phi), r * np.sin(phi)]) for r in rings])
    np.savetxt(tmp_path / "probes.csv", pts, delimiter=",", header="x_m,y_m", comments="")
    fr = _run(field, ka, [_circle(1.0, boundary="penetrable", eps_r=eps)],
              near={"probes_csv": str(tmp_path / "probes.csv")})
    n, c, coefs = layered_circle_coefficients(ka, 1.0, [(1.0, 2 * ka, _beta(field, eps))], "medium", 50)
    r = np.hypot(pts[:, 0], pts[:, 1])
    ang = np.arctan2(pts[:, 1], pts[:, 0]) - math.radians(FROM)
    e = np.exp(1j * np.outer(ang, n)) * (1j**n)
    outside = np.sum(e * (sp.jv(n, ka * r[:, None]) + c * sp.hankel2(n, ka * r[:, None])), axis=1)
    inside = np.sum(e * coefs[0][:, 0] * sp.jv(n, 2 * ka * r[:, None]), axis=1)
    ref = np.where(r > 1.0, outside, inside)
    got = fr.near_field.probes.total[:, 0]
    assert not fr.near_field.probes.inside.any()  # penetrable bodies are not masked
    assert np.max(np.abs(got - ref)) < 1e-6


@pytest.mark.parametrize("field", ["tm", "te"])
@pytest.mark.parametrize("coated", [False, True], ids=["dielectric", "coated"])
def test_square_with_corners_identities_and_convergence(field, coated):
    # Corners between two media (compressed by RCIP): reciprocity, energy conservation
    # (lossless, so C_ext = C_s) and tolerance 1e-6 -> 1e-8, for a dielectric square and
    # for a PEC square under a dielectric square coating.
    bodies = [{"name": "b", "shape": SQUARE, "boundary": "penetrable", "eps_r": 3.0}]
    if coated:
        bodies.append({"name": "core", "shape": {"kind": "rectangle", "width_m": 0.6, "height_m": 0.6},
                       "boundary": "pec"})

    def solve(tol):
        doc = case(field, 5 * C0 / (2 * math.pi), bodies,
                   angles={"start": 0, "stop": 359.5, "count": 720}, solver={"tolerance": tol})
        doc["incident"] = [{"kind": "plane", "from_deg": [20.0, 75.0]}]
        return solve_problem(parse_case(doc).problem).frequencies[0]

    coarse, fine = solve(1e-6), solve(1e-8)
    ff = fine.farfield
    scale = np.max(np.abs(ff))
    assert abs(ff[150, 0] - ff[40, 1]) / scale < 1e-8
    assert np.max(fine.cross_sections.optical_residual) < 1e-8
    assert np.max(np.abs(coarse.farfield - ff)) / scale < 1e-6
    # corners cost their coarse panels only (graded refinement needs 5000-8000 here)
    assert fine.unknowns <= (2048 if coated else 640)


def test_penetrable_case_errors():
    base = case("te", 1e9, [_circle(0.1, boundary="penetrable", eps_r=[2.0, 0.5])])
    with pytest.raises(CaseError, match=r"\[body.0.eps_r\].*positive imaginary part"):
        parse_case(base)
    base = case("te", 1e9, [_circle(0.1, boundary="penetrable", material="unobtainium")])
    with pytest.raises(CaseError, match=r"'unobtainium' is not defined"):
        parse_case(base)
    base = case("acoustic", 1e3, [_circle(0.1, boundary="penetrable", material="ptfe")])
    with pytest.raises(CaseError, match="needs sound_speed_m_s and density_kg_m3"):
        parse_case(base)
    base = case("tm", 1e9, [_circle(0.1, boundary="pec", eps_r=2.0)])
    with pytest.raises(CaseError, match="only allowed with boundary"):
        parse_case(base)
    # a body inside an impenetrable one, or crossing a penetrable one, is refused
    base = case("tm", 1e9, [_circle(0.1, name="a", boundary="pec"), _circle(0.05, name="b", boundary="pec")])
    with pytest.raises(CaseError, match="overlap or touch"):
        parse_case(base)
    crossing = {"name": "b", "shape": {"kind": "circle", "radius_m": 0.05, "center_m": [0.09, 0.0]},
                "boundary": "pec"}
    base = case("tm", 1e9, [_circle(0.1, name="a", boundary="penetrable", eps_r=2.0), crossing])
    with pytest.raises(CaseError, match="overlap or touch"):
        parse_case(base)


def test_named_and_built_in_materials():
    doc = case("te", 1e9, [_circle(0.1, name="a", boundary="penetrable", material="fairing"),
                           _circle(0.05, name="b", boundary="penetrable", material="ptfe")])
    doc["body"][1]["shape"]["center_m"] = [0.3, 0.0]
    doc["materials"] = {"fairing": {"eps_r": 4.2, "loss_tangent": 0.015}}
    problem = parse_case(doc).problem
    a, b = (s.material for s in problem.scatterers)
    assert a.permittivity(1e9) == pytest.approx(4.2 * (1 - 0.015j))
    assert b.eps_r == 2.1  # the built-in table (engine/materials.py)
    # conductivity enters as -j sigma / (w eps0) (exp(+j w t))
    doc["materials"]["fairing"] = {"eps_r": 1.0, "conductivity_s_m": 0.01}
    a = parse_case(doc).problem.scatterers[0].material
    eps0 = 8.8541878128e-12  # CODATA 2018 (from memory)
    assert a.permittivity(1e9).imag == pytest.approx(-0.01 / (2 * math.pi * 1e9 * eps0), rel=1e-9)


def test_plasmonic_corner_is_refused_and_smooth_body_is_not():
    # eps_r = -2 at a right-angle corner lies in the ill-posed interval (-3, -1/3)
    # (Bonnet-Ben Dhia, Chesnel & Ciarlet, from memory; DESIGN.md); a circle has no corner.
    from sectionwave.engine import ProblemError

    doc = case("te", 1e8, [{"name": "b", "shape": SQUARE, "boundary": "penetrable", "eps_r": -2.0}])
    with pytest.raises(ProblemError, match=r"corner at \(-0.5, -0.5\) m \(90.0 deg\).*ill-posed"):
        solve_problem(parse_case(doc).problem)
    ka = 1.0
    fr = _run("te", ka, [_circle(1.0, boundary="penetrable", eps_r=[-2.0, -0.5])])
    eps = -2.0 - 0.5j
    n, c, _ = layered_circle_coefficients(ka, 1.0, [(1.0, ka * np.sqrt(eps), 1 / eps)], "medium", 40)
    assert relative_error(fr.farfield[:, 0], coefficients_far_field(n, c, ka, fr.angles_deg, FROM)) < 1e-8
