"""Circular cylinder against its series solution (Balanis, Advanced Engineering
Electromagnetics, ch. 11), through the public API with the default tolerance."""

from __future__ import annotations

import math

import numpy as np
import pytest
from sectionwave.engine import parse_case, solve_problem

from tests.reference import C0, case, circle_far_field, relative_error

# Bessel zeros from DLMF table 10.21 (j_{0,1} and j'_{1,1}), the interior
# Dirichlet and Neumann eigenvalues of the unit disc.
J0_ZERO = 2.404825557695773
J1P_ZERO = 1.841183781340659


def _solve_circle(field, ka, radius=1.0, center=(0.2, -0.1), from_deg=30.0, **body):
    k = ka / radius
    f = k * C0 / (2 * math.pi)
    shape = {"kind": "circle", "radius_m": radius, "center_m": list(center)}
    doc = case(field, f, [{"name": "c", "shape": shape, "boundary": body.pop("boundary", "pec"), **body}],
               from_deg=from_deg)
    result = solve_problem(parse_case(doc).problem)
    return result.frequencies[0], k


@pytest.mark.parametrize("ka", [1.0, 10.0, 50.0, J0_ZERO, J1P_ZERO])
@pytest.mark.parametrize("field,kind", [("tm", "dirichlet"), ("te", "neumann")])
def test_pec_circle_matches_series(field, kind, ka):
    fr, k = _solve_circle(field, ka)
    ref = circle_far_field(ka, k, fr.angles_deg, 30.0, kind, center=(0.2, -0.1))
    err = relative_error(fr.farfield[:, 0], ref)
    assert err < 1e-8, err  # required accuracy: 1e-8 relative, complex far field
    # the run's own estimate must not claim more accuracy than it has by far
    assert fr.estimated_error < 1e-6


@pytest.mark.parametrize("z", [0.5 + 0.3j, 2.0 - 0.5j])
@pytest.mark.parametrize("field", ["tm", "te"])
def test_impedance_circle_matches_series_and_absorbs(field, z):
    ka = 6.0
    fr, k = _solve_circle(field, ka, boundary="impedance", impedance=[z.real, z.imag])
    # du/dn = lam u with lam = j k / z (TM) or j k z (TE), normals out of the body
    lam = 1j * k / z if field == "tm" else 1j * k * z
    ref = circle_far_field(ka, k, fr.angles_deg, 30.0, "robin", center=(0.2, -0.1), lam_a=lam * 1.0)
    assert relative_error(fr.farfield[:, 0], ref) < 1e-8
    w = fr.cross_sections.widths()
    # a passive surface absorbs: C_ext >= C_s (2D optical theorem), and the
    # absorption from the far field equals the power flux into the surface
    assert w["extinction_width_m"][0] > w["scattering_width_m"][0]
    assert w["optical_residual"][0] < 1e-8


def test_large_cylinder_backscatter_tends_to_geometric_optics():
    # Geometric optics: sigma_2D -> pi a for ka >> 1 (Balanis ch. 11, from memory);
    # at ka = 50 the creeping-wave ripple is a few percent.
    fr, k = _solve_circle("tm", 50.0, center=(0.0, 0.0), from_deg=0.0)
    sigma = 2 * np.pi * abs(fr.monostatic[0]) ** 2
    assert abs(sigma / math.pi - 1) < 0.05


@pytest.mark.parametrize("boundary,kind", [("soft", "dirichlet"), ("hard", "neumann")])
def test_acoustic_circle_matches_series(boundary, kind):
    # Sound-soft and sound-hard cylinders obey the same series as TM and TE PEC
    # (Bowman, Senior & Uslenghi, ch. 2, from memory), here in water.
    ka, radius, c = 8.0, 0.5, 1500.0
    k = ka / radius
    doc = case("acoustic", k * c / (2 * math.pi),
               [{"name": "c", "shape": {"kind": "circle", "radius_m": radius}, "boundary": boundary}])
    doc["wave"]["sound_speed_m_s"] = c
    fr = solve_problem(parse_case(doc).problem).frequencies[0]
    ref = circle_far_field(ka, k, fr.angles_deg, 0.0, kind)
    assert relative_error(fr.farfield[:, 0], ref) < 1e-8


def test_line_source_near_pec_circle_matches_series():
    # Line source at r_s outside a PEC (TM) circle at the origin. With the addition
    # theorem H0(k|r - r_s|) = sum_n J_n(k r) H_n(k r_s) e^{jn(phi - phi_s)} (DLMF 10.23.7),
    # u_scat = (j/4) sum_n (J_n(ka)/H_n(ka)) H_n(k r_s) H_n(k r) e^{jn(phi - phi_s)}, so
    # F = (j/4) sqrt(2/(pi k)) e^{j pi/4} sum_n j^n (J_n/H_n) H_n(k r_s) e^{jn(phi - phi_s)}.
    import scipy.special as sp

    ka, radius = 4.0, 1.0
    k = ka / radius
    rs, phis = 2.5, np.deg2rad(40.0)
    doc = case("tm", k * C0 / (2 * math.pi),
               [{"name": "c", "shape": {"kind": "circle", "radius_m": radius}, "boundary": "pec"}])
    doc["incident"] = [{"kind": "line", "position_m": [rs * math.cos(phis), rs * math.sin(phis)]}]
    fr = solve_problem(parse_case(doc).problem).frequencies[0]
    n = np.arange(-60, 61)
    coef = (1j**n) * sp.jv(n, ka) / sp.hankel2(n, ka) * sp.hankel2(n, k * rs)
    phi = np.deg2rad(fr.angles_deg)
    ref = 0.25j * np.sqrt(2 / (np.pi * k)) * np.exp(0.25j * np.pi) * (np.exp(1j * np.outer(phi - phis, n)) @ coef)
    assert relative_error(fr.farfield[:, 0], ref) < 1e-8
    assert np.isnan(fr.monostatic[0])  # no backscatter direction for a line source
