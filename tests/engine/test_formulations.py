"""Formulations and the boundary system.

References: the combined-field and Burton-Miller equations as written in the
``formulations`` glossary; the impedance factors ``lam = j k / z`` (TM,
sound) and ``j k z`` (TE) follow from the Leontovich condition
``E_tan = z eta0 n x H`` with exp(+j w t) and n out of the body (from
memory; Senior & Volakis, Approximate Boundary Conditions in
Electromagnetics, 1995). The circle's series solution is in
``tests/reference.py`` (Balanis, Advanced Engineering Electromagnetics, ch. 11).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from sectionwave.engine.fields import far_field
from sectionwave.engine.formulations import (
    Dirichlet,
    Neumann,
    Robin,
    coupling_constants,
    formulation_for,
    robin_factor,
)
from sectionwave.engine.mesh import BoundaryContour, build_panels
from sectionwave.engine.problem import IncidentWave, ProblemError, Scatterer
from sectionwave.engine.solve import solve_boundary
from sectionwave.engine.system import BoundarySystem, Region
from sectionwave.importers.curves import Body, Contour, EllipticalArc, circular_arc, polygon_segments

from tests.reference import circle_far_field, relative_error

LENGTHS = np.array([0.1, 0.1, 0.1, 0.02, 0.02])


def disc(center=(0.0, 0.0), radius=1.0) -> Contour:
    return Contour((circular_arc(center, radius, 0.0, 2 * math.pi),))


# ----------------------------------------------------------------- side maps


@pytest.mark.parametrize("k", [3.0, 7.5 + 0.5j])
def test_dirichlet_side_map(k):
    m = Dirichlet().outside(k, LENGTHS)
    n = LENGTHS.size
    for arr in (m.u, m.dudn, m.e1, m.e2):
        assert arr.shape == (n, 1) and arr.dtype == complex
    kr = abs(k)
    _, beta = coupling_constants(k)
    assert np.all(m.u == 0)
    assert np.allclose(m.dudn, kr)  # the unknown is dudn / |k|
    assert np.allclose(m.e1, beta / kr) and np.allclose(m.e1, -1j)  # (E2 + beta E1) / |k|, beta = -j |k|
    assert np.allclose(m.e2, 1 / kr)


@pytest.mark.parametrize("k", [3.0, 7.5 + 0.5j])
def test_neumann_side_map(k):
    m = Neumann().outside(k, LENGTHS)
    alpha, _ = coupling_constants(k)
    balance = LENGTHS / (LENGTHS + 1 / abs(k))
    assert m.u.shape == m.dudn.shape == m.e1.shape == m.e2.shape == (LENGTHS.size, 1)
    assert np.all(m.u == 1) and np.all(m.dudn == 0)
    assert np.allclose(m.e1[:, 0], balance, rtol=1e-15)
    assert np.allclose(m.e2[:, 0], alpha * balance, rtol=1e-15)
    assert np.allclose(alpha, -1j / abs(k))
    # short panels next to corners get smaller rows (the balance scales like h)
    assert abs(m.e1[3, 0]) < abs(m.e1[0, 0])


def test_robin_side_map():
    k, lam = 4.0, 2.0 + 3.0j
    m = Robin(lam).outside(k, LENGTHS)
    plain = Neumann().outside(k, LENGTHS)
    assert np.all(m.u == 1) and np.allclose(m.dudn, lam)  # du/dn = lam u
    assert np.array_equal(m.e1, plain.e1) and np.array_equal(m.e2, plain.e2)


def test_coupling_constants_have_nonzero_imaginary_parts():
    for k in (0.1, 1.0, 50.0, 3.0 - 0.2j):
        alpha, beta = coupling_constants(k)
        assert alpha.imag != 0 and beta.imag != 0
        assert alpha * beta == pytest.approx(-1.0)  # alpha = -j/|k|, beta = -j |k|


def test_impenetrable_formulations_have_no_inside():
    for f in (Dirichlet(), Neumann(), Robin(1j)):
        assert f.unknowns_per_node == 1 and not f.has_inside
        with pytest.raises(NotImplementedError, match="has no inner region"):
            f.inside(1.0, LENGTHS)


# ----------------------------------------------------------------- formulation_for


BODY = Body(disc())


@pytest.mark.parametrize(
    "field,boundary,cls",
    [("tm", "pec", Dirichlet), ("te", "pec", Neumann), ("acoustic", "soft", Dirichlet),
     ("acoustic", "hard", Neumann)],
)
def test_formulation_for_perfect_walls(field, boundary, cls):
    f = formulation_for(field, Scatterer("b", BODY, boundary), 2.0)
    assert type(f) is cls


@pytest.mark.parametrize(
    "field,expect",
    [("tm", lambda k, z: 1j * k / z), ("acoustic", lambda k, z: 1j * k / z), ("te", lambda k, z: 1j * k * z)],
)
def test_formulation_for_impedance(field, expect):
    k, z = 3.0, 0.4 - 0.7j
    f = formulation_for(field, Scatterer("b", BODY, "impedance", z), k)
    assert isinstance(f, Robin)
    assert f.lam == pytest.approx(expect(k, z), rel=1e-15)
    assert robin_factor(field, k, z) == f.lam


def test_passive_impedance_gives_an_absorbing_robin_factor():
    # Re z > 0 (passive) gives Im lam of the sign that takes power out of the field:
    # for TM lam = j k / z has Re(lam / (j k)) = Re(1/z) > 0
    lam = robin_factor("tm", 2.0, 1.0 + 1.0j)
    assert (lam / 2j).real > 0
    assert robin_factor("te", 2.0, 1.0 + 1.0j) / 2j == 1.0 + 1.0j


def test_formulation_for_errors():
    with pytest.raises(ProblemError, match="impedance boundary without an impedance"):
        formulation_for("tm", Scatterer("b", BODY, "impedance"), 1.0)
    with pytest.raises(ProblemError, match="'pec' is not available for acoustic"):
        formulation_for("acoustic", Scatterer("b", BODY, "pec"), 1.0)


# ----------------------------------------------------------------- the general assembly path


@pytest.fixture(scope="module")
def two_body_mesh():
    # a circle and a rotated ellipse, far enough apart; few panels keep the matrices small
    ellipse = Contour((EllipticalArc((2.5, 0.3), [[0.6, -0.2], [0.3, 0.4]], 0.0, 2 * math.pi),))
    return build_panels([BoundaryContour(disc(radius=0.8), 0, 2.0), BoundaryContour(ellipse, 1, 2.0)],
                        p=16, max_panel_wavelengths=0.5)


def general(system: BoundarySystem, monkeypatch) -> None:
    monkeypatch.setattr(BoundarySystem, "is_simple", property(lambda self: False))
    assert not system.is_simple


@pytest.mark.parametrize("forms", [(Dirichlet(), Dirichlet()), (Neumann(), Robin(1.5 - 2j)),
                                   (Dirichlet(), Robin(0.3 + 1j))])
def test_general_assembly_equals_compiled_single_region(two_body_mesh, forms, monkeypatch):
    mesh, k = two_body_mesh, math.pi
    simple = BoundarySystem(mesh, forms, k)
    assert simple.is_simple
    a_simple = simple.dense_matrix()
    rng = np.random.default_rng(1)
    u_inc = rng.standard_normal((mesh.n_nodes, 2)) + 1j * rng.standard_normal((mesh.n_nodes, 2))
    dn_inc = rng.standard_normal((mesh.n_nodes, 2)) + 1j * rng.standard_normal((mesh.n_nodes, 2))
    x = rng.standard_normal((mesh.n_nodes, 2)) + 0j
    b_simple = simple.right_hand_sides(u_inc, dn_inc)
    t_simple = simple.traces(x)
    # the same single region given explicitly, assembled block by block
    region = Region(k, ((0, 1), (1, 1)), True)
    explicit = BoundarySystem(mesh, forms, k, regions=[region])
    general(explicit, monkeypatch)
    a_general = explicit.dense_matrix()
    scale = np.abs(a_simple).max()
    assert np.abs(a_general - a_simple).max() < 1e-13 * scale
    assert np.allclose(explicit.right_hand_sides(u_inc, dn_inc), b_simple, rtol=1e-14, atol=0)
    for got, want in zip(explicit.traces(x), t_simple, strict=True):
        assert np.allclose(got, want, rtol=1e-14, atol=0)
    assert np.array_equal(explicit.node_unknowns(x)[0], x)


def test_system_layout(two_body_mesh):
    mesh = two_body_mesh
    system = BoundarySystem(mesh, [Dirichlet(), Neumann()], 1.0)
    assert system.n_unknowns == mesh.n_nodes
    assert system.regions == (Region(1.0, ((0, 1), (1, 1)), True),)
    with pytest.raises(ValueError, match="1 formulations for 2 contours"):
        BoundarySystem(mesh, [Dirichlet()], 1.0)


# ----------------------------------------------------------------- the circle through solve_boundary


@pytest.mark.parametrize(
    "form,kind,lam",
    [(Dirichlet(), "dirichlet", 0.0), (Neumann(), "neumann", 0.0), (Robin(2.0 - 1.5j), "robin", 2.0 - 1.5j)],
)
def test_circle_solves_to_series(form, kind, lam):
    ka, radius, center = 5.0, 0.5, (0.1, -0.2)
    k = ka / radius
    mesh = build_panels([BoundaryContour(disc(center, radius), 0, 2 * math.pi / k)],
                        max_panel_wavelengths=0.5 if kind == "robin" else 1.0)
    waves = [IncidentWave("w", "plane", from_deg=30.0), IncidentWave("w", "plane", from_deg=200.0)]
    sol = solve_boundary(BoundarySystem(mesh, [form], k), waves)
    angles = np.linspace(0.0, 360.0, 73)
    ff = far_field(mesh, k, sol.u, sol.dudn, angles)
    for col, w in enumerate(waves):
        ref = circle_far_field(ka, k, angles, w.from_deg, kind, center=center, lam_a=lam * radius)
        assert relative_error(ff[:, col], ref) < 1e-8
    # the boundary condition holds on the traces
    if kind == "dirichlet":
        assert np.all(sol.u == 0)
    else:
        assert np.allclose(sol.dudn, lam * sol.u, rtol=0, atol=1e-15 * np.abs(sol.u).max())


def test_circle_solves_to_series_through_the_general_path(monkeypatch):
    ka = 4.0
    k = ka
    mesh = build_panels([BoundaryContour(disc(), 0, 2 * math.pi / k)], max_panel_wavelengths=0.5)
    system = BoundarySystem(mesh, [Robin(1j * k / (0.5 + 0.5j))], k)
    general(system, monkeypatch)
    sol = solve_boundary(system, [IncidentWave("w", "plane", from_deg=0.0)])
    angles = np.linspace(0.0, 360.0, 37)
    ref = circle_far_field(ka, k, angles, 0.0, "robin", lam_a=1j * k / (0.5 + 0.5j))
    assert relative_error(far_field(mesh, k, sol.u, sol.dudn, angles)[:, 0], ref) < 1e-8


def test_square_and_polygon_system_is_square():
    sq = Contour(polygon_segments([[0, 0], [1, 0], [1, 1], [0, 1]]))
    mesh = build_panels([BoundaryContour(sq, 0, 1.0)], p=8, corner_levels=2)
    system = BoundarySystem(mesh, [Dirichlet()], 2.0)
    a = system.dense_matrix()
    assert a.shape == (mesh.n_nodes, mesh.n_nodes) and np.all(np.isfinite(a))
