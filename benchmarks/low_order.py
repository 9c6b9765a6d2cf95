"""Classic low-order reference solver for the PEC circle (TM, Dirichlet).

This is the textbook "method of moments with point matching" that the
high-order solver is compared against in ``bench_solver.py``:

* the circle of radius ``a`` is replaced by a regular polygon with ``M``
  vertices on the circle (flat panels of length ``h = 2 a sin(pi / M)``);
* the unknown ``psi = du/dn`` (the surface current, up to a constant) is
  constant on each panel;
* the equation is enforced at one collocation point per panel, its midpoint;
* off-panel entries use one-point (midpoint) quadrature,
  ``A[i, j] = G(x_i, x_j) h_j``;
* the self entry is the leading-order analytic integral of the logarithmic
  singularity of ``G = -(j/4) H0^(2)(k r)`` over a straight panel of length
  ``h`` centred on the collocation point (DLMF 10.8.2 small-argument form,
  ``int_{-h/2}^{h/2} log(k |s| / 2) ds = h (log(k h / 4) - 1)``)::

      A[i, i] = -(j/4) h (1 - (2j/pi) (log(k h / 4) + gamma - 1))

* the far field is the midpoint sum of the Green's representation with
  ``u = 0`` on the boundary,
  ``F(phi) = -e^(-j pi/4) / sqrt(8 pi k) sum_j psi_j h_j exp(j k r_hat . x_j)``.

Two equations are offered. ``single``: the first-kind single-layer
equation ``S psi = u_inc`` (the classic choice; it is singular at the
interior Dirichlet eigenfrequencies, zeros of ``J_n(k a)``, but ``k a = 50``
is not close to one). ``combined``: the direct combined-field equation
``psi / 2 + D' psi + beta S psi = du_inc/dn + beta u_inc`` with
``beta = -j k`` (resonance free); on a flat panel the self term of ``D'``
vanishes, so only the principal value ``1/2`` remains on the diagonal.

Kernel values come from the project's compiled loop
(``sectionwave.engine.kernels.kernel_matrices``), the same Bessel code the
high-order solver uses, so the timing comparison measures the
discretisation and not two different implementations of ``H0``.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np
import scipy.linalg as la
from sectionwave.engine.kernels import EULER_GAMMA, kernel_matrices

__all__ = ["LowOrderResult", "polygon_panels", "solve_circle_tm"]


@dataclass
class LowOrderResult:
    """Far field and stage timings of one low-order solve."""

    m: int
    farfield: np.ndarray
    t_assemble: float
    t_solve: float
    t_farfield: float

    @property
    def t_total(self) -> float:
        return self.t_assemble + self.t_solve + self.t_farfield


def polygon_panels(m: int, radius: float, center: tuple[float, float] = (0.0, 0.0)):
    """Midpoints, outward unit normals and lengths of the ``m`` flat panels.

    The vertices sit on the circle at angles ``2 pi i / m`` (counter-clockwise).
    """
    th = 2.0 * np.pi * np.arange(m + 1) / m
    verts = np.column_stack([np.cos(th), np.sin(th)]) * radius + np.asarray(center, float)
    a, b = verts[:-1], verts[1:]
    mid = 0.5 * (a + b)
    edge = b - a
    h = np.hypot(edge[:, 0], edge[:, 1])
    # The tangent turned clockwise points out of a counter-clockwise polygon.
    normals = np.column_stack([edge[:, 1], -edge[:, 0]]) / h[:, None]
    return mid, normals, h


def self_term(k: float, h: np.ndarray) -> np.ndarray:
    """Leading-order integral of ``G`` over a flat panel of length ``h`` about its midpoint."""
    return -0.25j * h * (1.0 - (2j / np.pi) * (np.log(k * h / 4.0) + EULER_GAMMA - 1.0))


def solve_circle_tm(
    k: float,
    radius: float,
    m: int,
    incident_deg: float,
    angles_deg: np.ndarray,
    *,
    equation: str = "single",
) -> LowOrderResult:
    """Solve TM (Dirichlet) scattering of a plane wave by the ``m``-gon; time each stage.

    The plane wave is ``exp(j k (x cos phi_i + y sin phi_i))`` (arriving from
    ``phi_i``), the same convention as ``sectionwave.engine.fields.plane_wave``.
    """
    if equation not in ("single", "combined"):
        raise ValueError(f"unknown equation {equation!r}")
    t0 = time.perf_counter()
    x, n, h = polygon_panels(m, radius)
    combined = equation == "combined"
    s_mat, _, dp_mat, _ = kernel_matrices(
        x, n, x, n, k, want_s=True, want_d=False, want_dp=combined, want_dt=False
    )
    s_mat *= h[None, :]
    s_mat[np.diag_indices(m)] = self_term(k, h)
    phi_i = math.radians(incident_deg)
    d = np.array([math.cos(phi_i), math.sin(phi_i)])
    u_inc = np.exp(1j * k * (x @ d))
    if combined:
        beta = -1j * k
        dp_mat *= h[None, :]  # diagonal is zero: flat self panel, r_hat . n_x = 0
        a_mat = dp_mat
        a_mat += beta * s_mat
        a_mat[np.diag_indices(m)] += 0.5
        rhs = 1j * k * (n @ d) * u_inc + beta * u_inc
    else:
        a_mat = s_mat
        rhs = u_inc
    t1 = time.perf_counter()
    psi = la.solve(a_mat, rhs, overwrite_a=True, overwrite_b=False, check_finite=False)
    t2 = time.perf_counter()
    phi = np.deg2rad(np.asarray(angles_deg, dtype=float))
    rhat = np.column_stack([np.cos(phi), np.sin(phi)])
    const = np.exp(-0.25j * np.pi) / np.sqrt(8.0 * np.pi * k)
    farfield = -const * (np.exp(1j * k * (rhat @ x.T)) @ (psi * h))
    t3 = time.perf_counter()
    return LowOrderResult(m, farfield, t1 - t0, t2 - t1, t3 - t2)
