"""An independent high-accuracy reference for polygons: Kress's graded-mesh Nystrom method.

R. Kress, "A Nystrom method for boundary integral equations in domains
with corners", Numer. Math. 58 (1990) 145-161: every side of the polygon
is parametrised through the sigmoidal substitution

    v(s) = (1/q - 1/2) ((pi - s)/pi)^3 + (1/q) (s - pi)/pi + 1/2,
    w(s) = 2 pi v(s)^q / (v(s)^q + v(2 pi - s)^q),   s in [0, 2 pi],

whose derivatives vanish to order ``q - 1`` at the corners, and the
integrals are done by the (midpoint) trapezoidal rule in the new
parameter, with the logarithmic part of the single-layer kernel split off
and integrated by the trigonometric product weights ``R_j`` (Kress,
Linear Integral Equations, 2nd ed., Sec. 12.3; from memory). On straight
sides the double-layer kernels vanish between points of the same side, so
only the single layer needs the split. The unknowns are the densities
times the parametric speed, which vanish at the corners.

Equations (normals out of the body, G = -(j/4) H0^(2)(k r)):

* sound-soft / TM: the direct combined equation for ``psi = du/dn``,
  ``psi/2 + D' psi + beta S psi = du_inc/dn + beta u_inc``, ``beta = -j k``;
  far field ``F = -c int psi exp(j k r_hat.y) ds``.
* sound-hard / TE: the indirect single-layer equation
  ``u_s = S eta``, ``eta/2 - D' eta = du_inc/dn``; far field
  ``F = c int eta exp(j k r_hat.y) ds``. (It fails only at interior
  Dirichlet eigenvalues, which the tests keep away from.)

with ``c = exp(-j pi/4) / sqrt(8 pi k)`` (DLMF 10.17.6). Nothing here
shares code with the engine.
"""

from __future__ import annotations

import numpy as np
import scipy.special as sp

EULER_GAMMA = 0.57721566490153286060651209


def _grading(sig: np.ndarray, q: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Kress's substitution ``w``, its derivative, and ``2 pi - w`` (without cancellation)."""
    def v(s: np.ndarray) -> np.ndarray:
        return (1 / q - 0.5) * ((np.pi - s) / np.pi) ** 3 + (1 / q) * (s - np.pi) / np.pi + 0.5

    def dv(s: np.ndarray) -> np.ndarray:
        return -(3 / np.pi) * (1 / q - 0.5) * ((np.pi - s) / np.pi) ** 2 + 1 / (q * np.pi)

    a, b = v(sig) ** q, v(2 * np.pi - sig) ** q
    da = q * v(sig) ** (q - 1) * dv(sig)
    db = -q * v(2 * np.pi - sig) ** (q - 1) * dv(2 * np.pi - sig)
    w = 2 * np.pi * a / (a + b)
    dw = 2 * np.pi * (da * b - a * db) / (a + b) ** 2
    return w, dw, 2 * np.pi * b / (a + b)


def polygon_nodes(vertices: np.ndarray, n_side: int, q: int = 8):
    """Nodes, unit normals, parametric speeds and the parameter step of the graded polygon.

    ``vertices`` run counter-clockwise; every side gets ``n_side`` nodes
    at the midpoints of an equispaced grid in the global parameter.
    """
    verts = np.asarray(vertices, dtype=float)
    m = len(verts)
    n = m * n_side
    h = 2 * np.pi / n
    s = h * (np.arange(n) + 0.5)
    side = np.minimum((s * m / (2 * np.pi)).astype(int), m - 1)
    sig = m * s - 2 * np.pi * side
    w, dw, w_rev = _grading(sig, q)
    a = verts[side]
    d = verts[(side + 1) % m] - a
    # Each node is stored as its nearer vertex plus an offset, so that nodes
    # crowding a vertex from both sides keep their mutual distances to full
    # relative precision.
    near_start = w < np.pi
    anchor = np.where(near_start, side, (side + 1) % m)
    off = np.where(near_start, w / (2 * np.pi), -w_rev / (2 * np.pi))[:, None] * d
    x = verts[anchor] + off
    dx = (m * dw / (2 * np.pi))[:, None] * d
    speed = np.hypot(dx[:, 0], dx[:, 1])
    length = np.hypot(d[:, 0], d[:, 1])
    normal = np.column_stack([d[:, 1], -d[:, 0]]) / length[:, None]
    return x, normal, speed, s, h, anchor, off


def _log_weights(s: np.ndarray, n_total: int) -> np.ndarray:
    """Trigonometric product weights ``R[i, j]`` for ``int log(4 sin^2((s_i - t)/2)) f(t) dt``."""
    nh = n_total // 2
    diff = s[:, None] - s[None, :]
    mm = np.arange(1, nh)
    # sum_m cos(m d) / m through a cosine table of the index differences
    idx = np.rint(diff / (2 * np.pi / n_total)).astype(int) % n_total
    table = np.cos(np.outer(np.arange(n_total), mm) * 2 * np.pi / n_total) @ (1.0 / mm)
    return -(2 * np.pi / nh) * table[idx] - (np.pi / nh**2) * np.cos(nh * diff)


def _operators(x, normal, speed, s, h, anchor, off, k):
    n = x.shape[0]
    dxy = x[:, None, :] - x[None, :, :]
    same = anchor[:, None] == anchor[None, :]
    dxy[same] = (off[:, None, :] - off[None, :, :])[same]
    r = np.hypot(dxy[..., 0], dxy[..., 1])
    eye = np.eye(n, dtype=bool)
    # Nodes next to a vertex may round onto it (their weights are ~1e-17 and
    # below); pairs at zero distance are left out.
    gone = (r == 0.0) & ~eye
    rs = np.where(r == 0.0, 1.0, r)
    # D' kernel (derivative at the target along its normal), zero on the same side
    g1 = 0.25j * k * sp.hankel2(1, k * rs) / rs
    dp = np.where(eye, 0.0, g1 * np.einsum("ijk,ik->ij", dxy, normal))
    same_side = np.abs(np.einsum("ijk,ik->ij", dxy, normal)) <= 1e-14 * np.maximum(r, 1e-300)
    dp = np.where(same_side, 0.0, dp)
    # S kernel split: G = A log(4 sin^2((s-t)/2)) + B
    g0 = -0.25j * sp.hankel2(0, k * rs)
    a = -sp.j0(k * r) / (4 * np.pi)
    lg = np.log(4 * np.sin(0.5 * (s[:, None] - s[None, :])) ** 2 + eye)
    b = np.where(eye | gone, 0.0, g0 - a * lg)
    dp = np.where(gone, 0.0, dp)
    a = np.where(gone, 0.0, a)
    b[eye] = -(np.log(k / 2) + EULER_GAMMA) / (2 * np.pi) - 0.25j - np.log(speed) / (2 * np.pi)
    rw = _log_weights(s, n)
    s_mat = (rw * a + h * b) * speed[None, :]  # acts on plain density values
    dp_mat = h * dp * speed[None, :]
    return s_mat, dp_mat


def solve_polygon(vertices, k: float, kind: str, from_deg, angles_deg, *, n_side: int = 200, q: int = 8):
    """Far field ``(n_angles, n_incidences)`` of a polygon, sound-soft (``'dirichlet'``) or sound-hard."""
    x, normal, speed, s, h, anchor, off = polygon_nodes(np.asarray(vertices, dtype=float), n_side, q)
    s_mat, dp_mat = _operators(x, normal, speed, s, h, anchor, off, k)
    phi_i = np.deg2rad(np.atleast_1d(np.asarray(from_deg, dtype=float)))
    d = np.stack([np.cos(phi_i), np.sin(phi_i)])
    u_inc = np.exp(1j * k * (x @ d))
    dn_inc = 1j * k * (normal @ d) * u_inc
    n = x.shape[0]
    # unknowns are density * speed: scale rows by the target's speed and columns by 1/speed
    sc = speed
    if kind == "dirichlet":
        beta = -1j * k
        mat = 0.5 * np.eye(n) + sc[:, None] * (dp_mat + beta * s_mat) / sc[None, :]
        rhs = sc[:, None] * (dn_inc + beta * u_inc)
        sign = -1.0
    else:
        mat = 0.5 * np.eye(n) - sc[:, None] * dp_mat / sc[None, :]
        rhs = sc[:, None] * dn_inc
        sign = 1.0
    phi = np.linalg.solve(mat, rhs)  # density * speed
    ang = np.deg2rad(np.asarray(angles_deg, dtype=float))
    rhat = np.column_stack([np.cos(ang), np.sin(ang)])
    c = np.exp(-0.25j * np.pi) / np.sqrt(8 * np.pi * k)
    return sign * c * (np.exp(1j * k * (rhat @ x.T)) * h) @ phi
