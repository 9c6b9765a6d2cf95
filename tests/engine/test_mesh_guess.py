"""The mesher's first guess: panels per wavelength from the tolerance, and an honest estimate.

References: the series of the circular cylinder (Balanis, Advanced
Engineering Electromagnetics, ch. 11, in tests/reference.py); for the 2:1
ellipse, a much finer run of the same solver (0.7-wavelength panels, whose
own error is below 1e-12: two such runs at 0.7 and 0.6 wavelengths agree to
4e-13). The perimeter of the ellipse is 4 a E(e^2) (complete elliptic
integral of the second kind, DLMF 19.9.9).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.special as sp
from sectionwave.engine import parse_case, solve_problem
from sectionwave.engine.adapt import CALIBRATED_MAX_WAVELENGTHS, CALIBRATION, global_estimate, is_calibrated
from sectionwave.engine.mesh import BoundaryContour, build_panels
from sectionwave.engine.run import PANEL_RULE, panel_wavelengths
from sectionwave.importers.curves import Contour, circular_arc, polygon_segments

from tests.reference import C0, case, circle_far_field, relative_error

CIRCLE = {"kind": "circle", "radius_m": 1.0}
ELLIPSE = {"kind": "ellipse", "semi_axes_m": [1.0, 0.5], "rotation_deg": 20.0}
FROM_DEG = 30.0


def _perimeter_wavelengths(shape: dict, ka: float) -> float:
    perimeter = 2 * math.pi if shape is CIRCLE else 4.0 * sp.ellipe(1.0 - 0.25)
    return perimeter * ka / (2 * math.pi)


def _solve(shape: dict, field: str, ka: float, solver: dict):
    doc = case(field, ka * C0 / (2 * math.pi), [{"name": "b", "shape": shape, "boundary": "pec"}],
               from_deg=FROM_DEG, solver=solver)
    return solve_problem(parse_case(doc).problem).frequencies[0]


def test_wavelength_rule_cuts_equal_pieces():
    # A circle 50 wavelengths round is meshed from four quarter arcs of 12.5
    # wavelengths each: ceil(12.5 / 1.0) = 13 equal panels each (exact count),
    # where halving alone would give 16.
    wavelength = 2 * math.pi / 50.0
    contour = Contour((circular_arc((0.0, 0.0), 1.0, 0.0, 2 * math.pi),))
    mesh = build_panels([BoundaryContour(contour, 0, wavelength)], max_panel_wavelengths=1.0)
    assert mesh.n_panels == 52
    assert np.allclose(mesh.lengths, 2 * math.pi / 52, rtol=1e-12)


def test_panel_rule_follows_the_tolerance():
    # L = c (2 p / (e pi)) (tol n^s)^(1 / (p - d)): two decades of tolerance are a
    # factor 10^(2/14) in panel length with 16 nodes for TE (s = 0, d = 2); for TM
    # (s = 1/2, d = 0) the length solves that law with n = perimeter / L (the law
    # in run.panel_wavelengths).
    def rule(tol: float, field: str = "te", boundary: str = "pec", freq: float = 1e9) -> float:
        doc = case(field, freq, [{"name": "b", "shape": CIRCLE, "boundary": boundary,
                                  **({"impedance": [1.0, 0.0]} if boundary == "impedance" else {})}],
                   solver={"tolerance": tol})
        return panel_wavelengths(parse_case(doc).problem)

    assert rule(1e-8) / rule(1e-10) == pytest.approx(10 ** (2 / 14), rel=1e-12)
    c, s, d = PANEL_RULE["dirichlet"]
    for freq in (1e9, 3e10):
        length = rule(1e-8, "tm", freq=freq)
        n = 2 * math.pi / (C0 / freq) / length
        assert length == pytest.approx(c * 32 / (math.e * math.pi) * (1e-8 * n**s) ** (1 / (16 - d)), rel=2e-3)
    assert rule(1e-8, "tm", freq=3e10) > rule(1e-8, "tm", freq=1e9)  # more panels: longer ones suffice
    assert rule(1e-8) < rule(1e-8, "tm")  # the hypersingular equation needs shorter panels
    assert rule(1e-3, "tm", freq=3e10) < CALIBRATED_MAX_WAVELENGTHS  # never coarser than calibrated
    assert rule(1e-8, boundary="impedance") == 0.5  # measured default kept


def test_plain_sum_where_not_calibrated():
    # Corners, other kinds, coarse or uneven meshes keep the plain sum of the panel estimates.
    k = 2 * math.pi / 0.05
    square = Contour(polygon_segments([[0, 0], [1, 0], [1, 1], [0, 1]]))
    mesh = build_panels([BoundaryContour(square, 0, 0.05)], tolerance=1e-6)
    est = np.full(mesh.n_panels, 1e-9)
    assert not is_calibrated(mesh, ["dirichlet"], k)
    assert global_estimate(mesh, est, ["dirichlet"], k) == pytest.approx(est.sum())
    circle = Contour((circular_arc((0.0, 0.0), 1.0, 0.0, 2 * math.pi),))
    fine = build_panels([BoundaryContour(circle, 0, 0.2)], max_panel_wavelengths=1.0)
    k = 2 * math.pi / 0.2
    est = np.full(fine.n_panels, 1e-9)
    assert is_calibrated(fine, ["neumann"], k) and not is_calibrated(fine, ["robin"], k)
    assert not is_calibrated(fine, ["neumann"], 3 * k)  # panels of three wavelengths
    assert not is_calibrated(fine, ["neumann"], None)
    cal = CALIBRATION["dirichlet"]
    assert global_estimate(fine, est, ["dirichlet"], k) == pytest.approx(
        cal.factor * est.sum() / fine.n_panels**cal.panel_power)
    uneven = fine.split([0])
    assert not is_calibrated(uneven, ["dirichlet"], k)


# (field, ka, tolerance, most unknowns per wavelength allowed): the fewest that
# meet these tolerances at ka = 50 (scanning the panel length against the
# series) are about 10.2 (TM, 1e-8) and 15.4 (TE, 1e-10); bounds 20-30 % above.
@pytest.mark.parametrize("field,ka,tol,most", [("tm", 50.0, 1e-8, 13.0), ("te", 50.0, 1e-10, 20.0),
                                               ("te", 20.0, 1e-8, 20.0)])
def test_circle_lands_near_the_tolerance(field, ka, tol, most):
    fr = _solve(CIRCLE, field, ka, {"tolerance": tol})
    ref = circle_far_field(ka, ka, fr.angles_deg, FROM_DEG, "dirichlet" if field == "tm" else "neumann")
    err = relative_error(fr.farfield[:, 0], ref)
    per_wavelength = fr.unknowns / _perimeter_wavelengths(CIRCLE, ka)
    assert err <= tol, err  # the requested accuracy, against the series
    assert fr.estimated_error >= err  # an honest estimate
    assert fr.estimated_error <= tol
    assert per_wavelength <= most, per_wavelength
    # not four digits past the tolerance any more (25.6 unknowns per wavelength, 9e-14, before)
    assert err > 1e-4 * tol


@pytest.mark.parametrize("field,tol", [("tm", 1e-10), ("te", 1e-8)])
def test_ellipse_meets_the_tolerance_with_an_honest_estimate(field, tol):
    ka = 50.0
    fr = _solve(ELLIPSE, field, ka, {"tolerance": tol})
    ref = _solve(ELLIPSE, field, ka, {"tolerance": 1e-11, "max_panel_wavelengths": 0.7, "max_refinements": 0})
    err = relative_error(fr.farfield[:, 0], ref.farfield[:, 0])
    per_wavelength = fr.unknowns / _perimeter_wavelengths(ELLIPSE, ka)
    assert err <= tol, err
    assert fr.estimated_error >= err
    # the fewest meeting these tolerances are about 15 (TM, 1e-10) and 13 (TE, 1e-8)
    assert per_wavelength <= 20.0, per_wavelength
