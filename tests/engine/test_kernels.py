"""Kernels and singular quadrature against tables and high-precision quadrature."""

from __future__ import annotations

import mpmath as mp
import numpy as np
import pytest
from sectionwave.engine.kernels import bessel_j0j1, green, kernel_matrices
from sectionwave.engine.mesh import BoundaryContour, build_panels
from sectionwave.engine.operators import assemble_operators
from sectionwave.engine.quadrature import gauss_legendre, self_cauchy_weights, self_log_weights
from sectionwave.importers.curves import Contour, EllipticalArc


def test_bessel_values_match_tables():
    # Abramowitz & Stegun table 9.1 / DLMF 10.75 (10 digits, from memory).
    j0, j1 = bessel_j0j1(np.array([1.0, 5.0]))
    assert j0 == pytest.approx([0.7651976866, -0.1775967713], abs=1e-10)
    assert j1 == pytest.approx([0.4400505857, -0.3275791376], abs=1e-10)


def test_green_function_value_and_gradient():
    # Y0(1) = 0.0882569642, Y1(1) = -0.7812128213 (A&S table 9.1, from memory).
    g = green(1.0, np.array([1.0]))[0]
    assert g == pytest.approx(-0.25j * (0.7651976866 - 1j * 0.0882569642), abs=1e-10)
    # grad_x G = (j k / 4) H1^(2)(k r) r_hat: check dG/dn_x for x = (1, 0), y = 0, n_x = +x
    _, _, dp, _ = kernel_matrices(np.array([[1.0, 0.0]]), np.array([[1.0, 0.0]]),
                                  np.array([[0.0, 0.0]]), np.array([[0.0, 1.0]]), 1.0)
    assert dp[0, 0] == pytest.approx(0.25j * (0.4400505857 + 1j * 0.7812128213), abs=1e-10)


def test_kernels_complex_wavenumber_fall_back_consistently():
    # The compiled real-k loop (Cephes J/Y and the fitted Hankel amplitude)
    # and scipy's complex Hankel functions must agree (consistency of two
    # independent implementations of DLMF 10.4.4).
    pts = np.array([[0.3, 0.1], [1.0, -0.4]])
    nrm = np.array([[0.0, 1.0], [1.0, 0.0]])
    a = kernel_matrices(pts, nrm, pts[::-1], nrm[::-1], 2.0)
    b = kernel_matrices(pts, nrm, pts[::-1], nrm[::-1], 2.0 + 1e-14j)
    for x, y in zip(a[:3], b[:3]):
        assert np.allclose(x, y, rtol=1e-10)


def test_self_weights_integrate_log_and_principal_value_exactly():
    x, _ = gauss_legendre(16)
    # int_{-1}^{1} log|t - s| dt = (1-s)log(1-s) + (1+s)log(1+s) - 2 (exact)
    s = x[3]
    assert self_log_weights(16)[3].sum() == pytest.approx((1 - s) * np.log(1 - s) + (1 + s) * np.log(1 + s) - 2, abs=1e-13)
    # PV int t^2 / (t - s) dt = 2 s + s^2 log((1-s)/(1+s)) (exact)
    assert self_cauchy_weights(16)[3] @ x**2 == pytest.approx(2 * s + s**2 * np.log((1 - s) / (1 + s)), abs=1e-12)


@pytest.mark.parametrize("node", [0, 7])
def test_self_panel_single_layer_matches_mpmath(node):
    # One panel of an ellipse; S restricted to that panel's columns against
    # 25-digit adaptive quadrature of -(j/4) H0^(2)(k r) f(y) ds (mpmath).
    arc = EllipticalArc(np.zeros(2), np.diag([1.0, 0.6]), 0.0, 2 * np.pi)
    mesh = build_panels([BoundaryContour(Contour((arc,)), 0, 2 * np.pi / 3.0)], tolerance=1e-10)
    k = 3.0
    ops = assemble_operators(mesh, k, need_d=False, need_dp=False, need_t=False)
    t0, t1 = mesh.t0[0], mesh.t1[0]
    p = mesh.p
    f = lambda th: mp.cos(2 * th) + 0.3  # noqa: E731 - a smooth density in the curve parameter
    xs, _ = gauss_legendre(p)
    th_nodes = arc.theta0 + arc.sweep * (t0 + (t1 - t0) * (xs + 1) / 2)
    ours = ops.S[node, :p] @ np.array([float(f(t)) for t in th_nodes])
    mp.mp.dps = 25
    xt, yt = mesh.nodes[node]
    a, b = arc.theta0 + arc.sweep * t0, arc.theta0 + arc.sweep * t1
    def integrand(th):
        x, y = mp.cos(th), 0.6 * mp.sin(th)
        r = mp.sqrt((x - xt) ** 2 + (y - yt) ** 2)
        speed = mp.sqrt(mp.sin(th) ** 2 + 0.36 * mp.cos(th) ** 2)  # ds / dtheta
        return -0.25j * mp.hankel2(0, k * r) * f(th) * speed
    th_i = th_nodes[node]
    ref = mp.quad(integrand, [a, th_i, b])
    assert abs(ours - complex(ref)) < 1e-12 * abs(complex(ref))


def test_checked_in_hankel_amplitude_polynomials_match_the_fit():
    # engine/_hankel_amplitude.py holds the Chebyshev fit of M_nu with literal
    # monomial coefficients (so the loops that inline it can be cached); it
    # must reproduce the fit, and the fit must reproduce scipy's Hankel
    # functions (DLMF 10.4.4 / 10.17.4) to the stated 3e-14.
    from numpy.polynomial import chebyshev
    from sectionwave.engine import _hankel_amplitude as amp
    from sectionwave.engine import kernels

    s = np.linspace(-1.0, 1.0, 401)
    coef = kernels._amplitude_coefficients()
    for row, name in zip(coef, ("m0r", "m0i", "m1r", "m1i")):
        ours = np.array([getattr(amp, f"eval_{name}")(v) for v in s])
        assert np.max(np.abs(ours - chebyshev.chebval(s, row))) < 1e-15
    x = kernels.HANKEL_SPLIT / (0.5 * (s[1:] + 1.0))
    for nu in (0, 1):
        m = kernels._amplitude(nu, x)
        fit_re = np.array([getattr(amp, f"eval_m{nu}r")(v) for v in s[1:]])
        fit_im = np.array([getattr(amp, f"eval_m{nu}i")(v) for v in s[1:]])
        assert np.max(np.abs(fit_re + 1j * fit_im - m)) < 3e-14


def test_legendre_q_matches_mpmath_and_scipy():
    # Q_k on (-1, 1) against 30-digit mpmath (legenq, type 2) and scipy.special.lqn.
    from scipy.special import lqn
    from sectionwave.engine.quadrature import _legendre_q

    mp.mp.dps = 30
    x, _ = gauss_legendre(16)
    for s in x[::3]:
        ours = _legendre_q(15, float(s))
        ref = [float(mp.legenq(k, 0, mp.mpf(float(s)), type=2)) for k in range(16)]
        assert np.max(np.abs(ours - ref)) < 2e-15
        assert np.allclose(ours, lqn(15, float(s))[0], rtol=0, atol=1e-15)
