"""Bodies with sharp corners: exact identities and convergence under refinement.

Reciprocity of the bistatic far field, F(phi_s | phi_i) = F(phi_i + pi | phi_s + pi)
in this normalisation, and the 2D optical theorem are exact identities of the
continuous problem (Colton & Kress, Inverse Acoustic and Electromagnetic
Scattering Theory, ch. 3, from memory); convergence as the tolerance is
tightened guards against an under-resolved corner that keeps both identities.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from sectionwave.engine import parse_case, solve_problem

from tests.reference import C0, L_SHAPE, SQUARE, case


def _solve(field, shape, tol, corners="compressed", method="auto"):
    k = 5.0
    doc = case(field, k * C0 / (2 * math.pi), [{"name": "b", "shape": shape, "boundary": "pec"}],
               angles={"start": 0, "stop": 359.5, "count": 720},
               solver={"tolerance": tol, "corners": corners, "method": method})
    doc["incident"] = [{"kind": "plane", "from_deg": [20.0, 75.0]}]
    return solve_problem(parse_case(doc).problem).frequencies[0]


@pytest.mark.parametrize("corners", ["compressed", "graded"])
@pytest.mark.parametrize("shape", [SQUARE, L_SHAPE], ids=["square", "L"])
@pytest.mark.parametrize("field", ["tm", "te"])
def test_corner_bodies_identities_and_convergence(field, shape, corners):
    coarse = _solve(field, shape, 1e-6, corners)
    fine = _solve(field, shape, 1e-8, corners)
    ff = fine.farfield
    scale = np.max(np.abs(ff))
    # Reciprocity: a wave from 20 deg seen at 75 deg equals one from 75 deg seen at 20 deg
    # (sources and observers swapped: angle indices 150 and 40 on the 0.5 deg grid).
    assert abs(ff[150, 0] - ff[40, 1]) / scale < 1e-8
    assert np.max(fine.cross_sections.optical_residual) < 1e-8
    # Tightening the tolerance changes the answer by no more than the looser tolerance.
    change = np.max(np.abs(fine.farfield - coarse.farfield)) / scale
    assert change < 1e-6, change


@pytest.mark.parametrize("field", ["tm", "te"])
def test_wide_thin_strip_broadside_tends_to_physical_optics(field):
    # Physical optics: the broadside echo width of a wide flat PEC strip is
    # k w^2 for both polarisations (Balanis, Advanced Engineering
    # Electromagnetics, ch. 11, from memory); at w = 10 wavelengths the edge
    # diffraction changes it by a few tenths of a percent. The plate is
    # 0.02 wavelengths thick: its faces are close but meet through the body.
    wavelength, width = 1.0, 10.0
    k = 2 * math.pi / wavelength
    shape = {"kind": "rectangle", "width_m": 0.02, "height_m": width}
    doc = case(field, C0 / wavelength, [{"name": "strip", "shape": shape, "boundary": "pec"}],
               from_deg=0.0, angles=[0.0], solver={"tolerance": 1e-6})
    fr = solve_problem(parse_case(doc).problem).frequencies[0]
    sigma = 2 * math.pi * abs(fr.monostatic[0]) ** 2
    assert abs(sigma / (k * width**2) - 1) < 0.01
    assert fr.mesh.n_nodes < 6000  # thin bodies must not be refined to their thickness


def test_memory_limit_refines_corners_less_and_says_so(monkeypatch):
    # With room for about 1500 unknowns, a square at tolerance 1e-8 (which wants
    # about 3500) is solved with shallower corner refinement, and the run warns.
    import sectionwave.engine.solve as solve_mod
    from sectionwave.engine import AccuracyWarning

    # TM (Dirichlet) plans two complex N x N matrices (S and D'; system and LU in place)
    room = 0.8 * solve_mod.PLAN_MARGIN * 2 * 16 * 1500**2
    monkeypatch.setattr(solve_mod, "available_memory_bytes", lambda: int(room / 0.8))
    import warnings

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fr = _solve("tm", SQUARE, 1e-8, corners="graded", method="dense")  # the dense memory plan
    assert any(issubclass(w.category, AccuracyWarning) and "corners were refined" in str(w.message)
               for w in caught)
    assert fr.mesh.n_nodes <= 1500
    assert any("fit in memory" in w for w in fr.warnings)
    # the answer is still close: reciprocity holds to the looser corner tolerance
    ff = fr.farfield
    assert abs(ff[150, 0] - ff[40, 1]) / np.max(np.abs(ff)) < 1e-4


@pytest.mark.parametrize("field,kind,n_side", [("tm", "dirichlet", 500), ("te", "neumann", 400)])
def test_compressed_corners_match_kress_reference(field, kind, n_side):
    # The run's own path (compressed corners, adaptive refinement) against Kress's
    # graded-mesh Nystrom method (tests/reference_kress.py; R. Kress, Numer. Math. 58, 1990),
    # which shares no code with the engine, on the L-shape (one re-entrant corner).
    from tests.reference_kress import solve_polygon

    k = 5.0
    angles = np.arange(0.0, 360.0, 7.5)
    vertices = np.array(L_SHAPE["points_m"], dtype=float)
    doc = case(field, k * C0 / (2 * math.pi), [{"name": "b", "shape": L_SHAPE, "boundary": "pec"}],
               from_deg=20.0, angles=angles.tolist(), solver={"tolerance": 1e-12})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the estimate may stall just above 1e-12 (rounding)
        fr = solve_problem(parse_case(doc).problem).frequencies[0]
    ref = solve_polygon(vertices, k, kind, [20.0], angles, n_side=n_side, q=10)
    assert np.max(np.abs(fr.farfield - ref)) / np.max(np.abs(ref)) < 1e-10
    assert fr.unknowns < 1000  # graded corners need about 5000 here


@pytest.mark.parametrize("field", ["tm", "te"])
def test_impedance_square_with_compressed_corners(field):
    # Reciprocity and passivity (C_ext > C_s) of an absorbing square (Colton & Kress, from
    # memory), and agreement under a finer coarse mesh.
    def solve(mpw):
        doc = case(field, 5 * C0 / (2 * math.pi),
                   [{"name": "b", "shape": SQUARE, "boundary": "impedance", "impedance": [0.6, 0.3]}],
                   angles={"start": 0, "stop": 359.5, "count": 720},
                   solver={"tolerance": 1e-8, "max_panel_wavelengths": mpw})
        doc["incident"] = [{"kind": "plane", "from_deg": [20.0, 75.0]}]
        return solve_problem(parse_case(doc).problem).frequencies[0]

    a, b = solve(0.5), solve(0.25)
    ff = b.farfield
    scale = np.max(np.abs(ff))
    assert abs(ff[150, 0] - ff[40, 1]) / scale < 1e-8
    w = b.cross_sections
    assert np.all(w.extinction_width_m > w.scattering_width_m)
    # absorption two ways: C_ext - C_s and the flux into the surface (rebuilt next to corners)
    assert np.max(w.optical_residual) < 1e-8
    assert np.max(np.abs(a.farfield - ff)) / scale < 1e-8


@pytest.mark.parametrize("field", ["tm", "te"])
def test_near_field_up_to_a_corner(field, tmp_path):
    # Fields 1e-3 to 0.1 wavelengths from a corner: compressed corners (the density rebuilt
    # on the refined levels) against graded corners, an independent discretisation of the
    # same equations (agreement measured 2.6e-10 TM, 2.2e-12 TE).
    lam = 2 * math.pi / 5.0
    angles = np.linspace(0.0, 2 * math.pi, 13)[:-1] + 0.1
    pts = [np.array([0.5, 0.5]) + d * lam * np.array([math.cos(a), math.sin(a)])
           for d in (1e-3, 1e-2, 0.1) for a in angles]
    pts = np.array([q for q in pts if not (abs(q[0]) < 0.5 and abs(q[1]) < 0.5)])
    np.savetxt(tmp_path / "probes.csv", pts, delimiter=",", header="x_m,y_m", comments="")
    fields = {}
    for corners in ("compressed", "graded"):
        doc = case(field, 5 * C0 / (2 * math.pi), [{"name": "b", "shape": SQUARE, "boundary": "pec"}],
                   from_deg=20.0, solver={"tolerance": 1e-10, "corners": corners})
        doc["near_field"] = {"probes_csv": str(tmp_path / "probes.csv")}
        fields[corners] = solve_problem(parse_case(doc).problem).frequencies[0].near_field.probes.total[:, 0]
    assert np.max(np.abs(fields["compressed"] - fields["graded"])) < 1e-8
