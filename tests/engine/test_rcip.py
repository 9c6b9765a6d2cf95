"""RCIP at corners: against an independent method, exact identities, and unknown counts.

Sources named beside each check: Kress's graded-mesh Nystrom method
(``tests/reference_kress.py``, R. Kress, Numer. Math. 58, 1990); the circle's
series (``tests/reference.py``, Balanis ch. 11); reciprocity
``F(phi_s | phi_i) = F(phi_i + pi | phi_s + pi)`` and the 2D optical theorem
(Colton & Kress, Inverse Acoustic and Electromagnetic Scattering Theory,
ch. 3, from memory).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from sectionwave.engine.fields import cross_sections, far_field, plane_wave
from sectionwave.engine.mesh import BoundaryContour, build_panels
from sectionwave.engine.nearfield import field_at_points
from sectionwave.engine.rcip_system import coarse_corner_mesh, fine_traces, rcip_solve
from sectionwave.importers.curves import Contour, Line, circular_arc

from tests.reference import circle_far_field, relative_error
from tests.reference_kress import solve_polygon

SQUARE = np.array([[0, 0], [1, 0], [1, 1], [0, 1]], dtype=float)
L_SHAPE = np.array([[0, 0], [1, 0], [1, 0.5], [0.5, 0.5], [0.5, 1], [0, 1]], dtype=float)
# one re-entrant corner (at (0.5, 0.4)) and two acute ones, none a right angle
NOTCHED = np.array([[0, 0], [1, 0], [1, 1], [0.5, 0.4], [0, 1]], dtype=float)
# a re-entrant corner of 238 degrees (inside) and convex ones of 90, 108 and 104 degrees
SKEWED_L = np.array([[0, 0], [1, 0], [1, 0.45], [0.55, 0.6], [0.45, 1], [0, 1]], dtype=float)
ANGLES = np.arange(0.0, 360.0, 7.5)


def _boundary(vertices: np.ndarray, k: float) -> list[BoundaryContour]:
    m = len(vertices)
    con = Contour(tuple(Line(vertices[i], vertices[(i + 1) % m]) for i in range(m)))
    return [BoundaryContour(con, 0, 2 * math.pi / k)]


def _solve(vertices, k, kind, from_deg, *, tol=1e-12, lam=0.0, mpw=1.0):
    inc = np.atleast_1d(np.asarray(from_deg, dtype=float))
    sol = rcip_solve(
        _boundary(vertices, k), k, kind, lambda pts, nrm: plane_wave(pts, nrm, k, inc),
        lam=lam, tolerance=tol, max_panel_wavelengths=mpw,
    )
    return sol


def _far(sol, k, angles=ANGLES):
    return far_field(sol.mesh, k, sol.u, sol.psi, angles)


#: Kress grading and nodes a side (measured self-convergence of the reference on the
#: L-shape, TE: 1e-11 at q = 10, 400 nodes; TM square: 2e-11 from 400 to 500 nodes).
KRESS = {"neumann": (10, 400), "dirichlet": (10, 500)}


def test_rcip_matches_kress_square_te():
    # Kress (1990) graded mesh against the RCIP far field.
    k = 5.0
    ref = solve_polygon(SQUARE, k, "neumann", [20.0], ANGLES, n_side=300, q=10)
    f = _far(_solve(SQUARE, k, "neumann", 20.0), k)
    assert relative_error(f, ref) < 1e-10


@pytest.mark.slow
@pytest.mark.parametrize("shape", [SQUARE, L_SHAPE, SKEWED_L], ids=["square", "L", "skewed-L"])
@pytest.mark.parametrize("kind", ["dirichlet", "neumann"])
def test_rcip_matches_kress_polygons(shape, kind):
    # Kress (1990) graded mesh against the RCIP far field, two incidences.
    # (Acute corners, as on NOTCHED, need far more Kress nodes than a test can afford.)
    k = 5.0
    q, n = KRESS[kind]
    ref = solve_polygon(shape, k, kind, [20.0, 110.0], ANGLES, n_side=n, q=q)
    f = _far(_solve(shape, k, kind, [20.0, 110.0]), k)
    assert relative_error(f, ref) < 1e-10


@pytest.mark.parametrize("shape", [SQUARE, L_SHAPE, NOTCHED], ids=["square", "L", "notched"])
@pytest.mark.parametrize("kind", ["dirichlet", "neumann"])
def test_rcip_reciprocity_and_optical_theorem(shape, kind):
    # Exact identities of the continuous problem (Colton & Kress, from memory).
    k = 5.0
    sol = _solve(shape, k, kind, [20.0, 75.0])
    grid = np.arange(720) * 0.5
    ff = far_field(sol.mesh, k, sol.u, sol.psi, grid)
    scale = np.max(np.abs(ff))
    # with incidence given as the direction the wave comes from, a wave from 20 deg seen at
    # 75 deg equals a wave from 75 deg seen at 20 deg (indices 150 and 40 on the 0.5 deg grid)
    assert abs(ff[150, 0] - ff[40, 1]) / scale < 1e-11
    widths = cross_sections(sol.mesh, k, sol.u, sol.psi, np.array([20.0, 75.0]))
    # the residual's rounding floor is about 1e-11 (measured: 4e-12 to 1.04e-11)
    assert np.max(widths.optical_residual) < 2e-11


@pytest.mark.parametrize("tol", [1e-8, 1e-12])
@pytest.mark.parametrize("kind", ["dirichlet", "neumann"])
def test_unknowns_per_corner(kind, tol):
    # A corner costs its four coarse panels at most: no more than 64 unknowns beyond the
    # mesh the wavelength alone asks for (build_panels without corner refinement), and
    # the compressed block is computed once for the four congruent corners.
    k = 5.0
    base = build_panels(_boundary(SQUARE, k), tolerance=tol, corner_levels=0)
    sol = _solve(SQUARE, k, kind, [20.0, 75.0], tol=tol)
    assert sol.n_unknowns - base.n_nodes <= 64 * 4
    assert sol.compressions == 1
    grid = np.arange(720) * 0.5
    ff = far_field(sol.mesh, k, sol.u, sol.psi, grid)
    # measured floor of the minimal mesh: 4e-12 (TM), 1e-13 (TE)
    assert abs(ff[150, 0] - ff[40, 1]) / np.max(np.abs(ff)) < max(tol, 1e-11)


@pytest.mark.parametrize("kind", ["robin", "robin-regularised"])
def test_impedance_square(kind):
    # Leontovich impedance z = 0.5 + 0.2j (TM, lam = j k / z): reciprocity holds for any
    # impedance, a passive surface (Re z > 0) absorbs (C_ext >= C_s), and refining the
    # coarse mesh (panels of a fifth of a wavelength instead of two fifths) leaves the far field alone.
    k = 5.0
    lam = 1j * k / (0.5 + 0.2j)
    side2 = 2.0 * SQUARE
    coarse = _solve(side2, k, kind, [20.0, 75.0], lam=lam, mpw=1.0)
    fine = _solve(side2, k, kind, [20.0, 75.0], lam=lam, mpw=0.25)
    assert fine.n_unknowns > coarse.n_unknowns
    grid = np.arange(720) * 0.5
    ff = far_field(fine.mesh, k, fine.u, fine.psi, grid)
    scale = np.max(np.abs(ff))
    assert abs(ff[150, 0] - ff[40, 1]) / scale < 1e-9
    widths = cross_sections(fine.mesh, k, fine.u, fine.psi, np.array([20.0, 75.0]))
    assert np.all(widths.extinction_width_m - widths.scattering_width_m > 0.05 * widths.extinction_width_m)
    change = relative_error(_far(coarse, k, grid), ff)
    assert change < 1e-8, change


def _circle(k: float) -> list[BoundaryContour]:
    arc = circular_arc((0.0, 0.0), 1.0, 0.0, 2 * math.pi)
    return [BoundaryContour(Contour((arc,)), 0, 2 * math.pi / k)]


@pytest.mark.parametrize("ka", [1.841183781340659, 2.404825557695773], ids=["j'11", "j01"])
@pytest.mark.parametrize("kind", ["dirichlet", "neumann", "neumann-regularised"])
def test_no_interior_resonance_on_the_circle(kind, ka):
    # At the interior Neumann (j'_11) and Dirichlet (j_01) eigenfrequencies of the unit
    # disc (DLMF table 10.21, from memory) the equations stay uniquely solvable:
    # the far field matches the series (Balanis ch. 11); near a resonance a
    # first-kind-deficient equation would lose many digits, not one.
    k = ka
    mesh, zones = coarse_corner_mesh(_circle(k), tolerance=1e-12)
    assert zones == []
    sol = rcip_solve(_circle(k), k, kind, lambda p, n: plane_wave(p, n, k, np.array([30.0])),
                     tolerance=1e-12, mesh_zones=(mesh, zones))
    ref = circle_far_field(ka, k, ANGLES, 30.0, kind.split("-")[0])
    assert relative_error(_far(sol, k)[:, 0], ref) < 1e-10


@pytest.mark.parametrize("shape", [SQUARE, L_SHAPE], ids=["square", "L"])
def test_regularised_sound_hard_system(shape):
    # The second-kind regularised block system and the Burton-Miller equation are two
    # discretisations of one problem: their far fields agree, and the identities hold.
    k = 5.0
    reg = _solve(shape, k, "neumann-regularised", [20.0, 75.0])
    bm = _solve(shape, k, "neumann", [20.0, 75.0])
    assert reg.n_unknowns == 2 * bm.n_unknowns
    grid = np.arange(720) * 0.5
    ff = far_field(reg.mesh, k, reg.u, reg.psi, grid)
    assert abs(ff[150, 0] - ff[40, 1]) / np.max(np.abs(ff)) < 1e-10
    assert relative_error(ff, far_field(bm.mesh, k, bm.u, bm.psi, grid)) < 3e-10


@pytest.mark.slow
def test_regularised_sound_hard_matches_kress():
    # Kress (1990) graded mesh, skewed L (re-entrant corner, obtuse convex corners).
    k = 5.0
    q, n = KRESS["neumann"]
    ref = solve_polygon(SKEWED_L, k, "neumann", [20.0, 110.0], ANGLES, n_side=n, q=q)
    f = _far(_solve(SKEWED_L, k, "neumann-regularised", [20.0, 110.0]), k)
    assert relative_error(f, ref) < 3e-10


@pytest.mark.parametrize("kind", ["dirichlet", "neumann"])
def test_curved_side_meets_straight_side(kind):
    # A half disc: arc and diameter meet at right angles, so the compressed blocks are
    # built on a curved side (Taylor expansion near the tip). Reciprocity and the optical
    # theorem (exact identities), and agreement between two coarse meshes, through the
    # engine's own path (compressed corners plus adaptive refinement).
    from sectionwave.engine import IncidentWave, Medium, Problem, Scatterer, SolverOptions, solve_problem
    from sectionwave.engine.problem import SPEED_OF_LIGHT_M_S
    from sectionwave.importers.curves import Body

    k = 5.0
    con = Contour((circular_arc((0.0, 0.0), 1.0, -math.pi / 2, math.pi),
                   Line(np.array([0.0, 1.0]), np.array([0.0, -1.0]))))
    grid = np.arange(720) * 0.5
    waves = (IncidentWave("a", "plane", from_deg=20.0), IncidentWave("a", "plane", from_deg=75.0))
    ffs = []
    for mpw in (1.0, 0.5):
        problem = Problem("tm" if kind == "dirichlet" else "te", Medium(SPEED_OF_LIGHT_M_S),
                          (Scatterer("half", Body(con), "pec"),), waves, (k * SPEED_OF_LIGHT_M_S / (2 * math.pi),),
                          grid, solver=SolverOptions(tolerance=1e-12, max_panel_wavelengths=mpw))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # the estimate may stall just above 1e-12 (rounding)
            fr = solve_problem(problem).frequencies[0]
        assert len(fr.mesh.corner_zones) == 2
        ff = fr.farfield
        assert abs(ff[150, 0] - ff[40, 1]) / np.max(np.abs(ff)) < 1e-11
        assert np.max(fr.cross_sections.optical_residual) < 1e-11
        ffs.append(ff)
    assert relative_error(ffs[0], ffs[1]) < 1e-10


IBEAM = np.array([
    [-0.5, -0.5], [0.5, -0.5], [0.5, -0.35], [0.075, -0.35], [0.075, 0.35], [0.5, 0.35],
    [0.5, 0.5], [-0.5, 0.5], [-0.5, 0.35], [-0.075, 0.35], [-0.075, -0.35], [-0.5, -0.35],
])


@pytest.mark.slow
@pytest.mark.parametrize("kind", ["dirichlet", "neumann"])
def test_ibeam_twelve_corners(kind):
    # I-beam-like section, 14 wavelengths around, 8 convex and 4 re-entrant corners: two
    # compressed blocks serve all twelve, each corner costs at most 64 unknowns beyond
    # the wavelength's mesh, and the exact identities hold (Colton & Kress, from memory).
    perimeter = float(np.sum(np.hypot(*np.diff(np.vstack([IBEAM, IBEAM[:1]]), axis=0).T)))
    k = 14 * 2 * math.pi / perimeter
    base = build_panels(_boundary(IBEAM, k), tolerance=1e-10, corner_levels=0)
    sol = _solve(IBEAM, k, kind, [20.0, 75.0], tol=1e-10)
    assert len(sol.zones) == 12 and sol.compressions == 2
    assert sol.n_unknowns - base.n_nodes <= 64 * 12
    grid = np.arange(720) * 0.5
    ff = far_field(sol.mesh, k, sol.u, sol.psi, grid)
    assert abs(ff[150, 0] - ff[40, 1]) / np.max(np.abs(ff)) < 1e-10
    widths = cross_sections(sol.mesh, k, sol.u, sol.psi, np.array([20.0, 75.0]))
    assert np.max(widths.optical_residual) < 1e-10


@pytest.mark.parametrize("kind", ["dirichlet", "neumann"])
def test_fine_traces_near_a_corner(kind):
    # Backward recursion (Helsing's tutorial, "reconstruction"): the rebuilt fine density
    # integrates smooth functions exactly as the weighted one does (P_W^T is exact for
    # Gauss-Legendre, so the far fields agree to rounding), and the near field right next
    # to a tip agrees between two coarse meshes whose corner zones differ eightfold.
    k = 5.0
    d = np.array([0.001, 0.01, 0.1])
    pts = np.array([1.0, 1.0]) + d[:, None] * np.array([1.0, 1.0]) / math.sqrt(2)

    def incident(points):
        return plane_wave(points, np.zeros_like(points), k, np.array([20.0]))[0]

    near = []
    for mpw in (1.0, 0.1):
        sol = rcip_solve(_boundary(SQUARE, k), k, kind, lambda p, n: plane_wave(p, n, k, np.array([20.0])),
                         tolerance=1e-10, max_panel_wavelengths=mpw, keep_history=True)
        fine, u, psi = fine_traces(sol, depth=14)
        assert fine.n_nodes > sol.mesh.n_nodes
        assert relative_error(far_field(fine, k, u, psi, ANGLES), _far(sol, k)) < 1e-13
        near.append(field_at_points(fine, k, u, psi, incident, pts)["total"][:, 0])
    assert np.max(np.abs(near[0] - near[1])) < 1e-10
