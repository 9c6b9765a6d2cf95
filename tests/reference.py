"""Reference solutions and canonical shapes shared by the tests.

Series solutions of the circular cylinder follow Balanis, Advanced
Engineering Electromagnetics (2nd ed., ch. 11, plane-wave scattering by a
circular cylinder), written here for the exp(+j w t) convention and the
far-field normalisation u_scat ~ F exp(-j k r) / sqrt(r):

    u_inc  = sum_n j^n J_n(k r) e^{j n (phi - phi_i)}          (Jacobi-Anger)
    u_scat = sum_n j^n c_n H_n^(2)(k r) e^{j n (phi - phi_i)}
    F      = sqrt(2 / (pi k)) e^{j pi/4} sum_n (-1)^n c_n e^{j n (phi - phi_i)}

with c_n = -J_n / H_n (TM PEC, sound-soft), -J_n' / H_n' (TE PEC,
sound-hard) and -(k J_n' - lam J_n) / (k H_n' - lam H_n) for the Robin
condition du/dn = lam u. The large-argument form of H_n^(2) is DLMF 10.17.6.

Canonical shapes (inline-shape tables for case files)::

    circle            square              L-shape
      .--.            +------+            +--+
     /    \\           |      |            |  |
     \\    /           |      |            |  +---+
      '--'            +------+            +------+
"""

from __future__ import annotations

import numpy as np
import scipy.special as sp

C0 = 299_792_458.0


def circle_coefficients(ka: float, kind: str, lam_a: complex = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Orders n and c_n for a circle of electrical radius ka (lam_a = lam * a)."""
    nmax = int(ka + 40 + 4 * ka ** (1 / 3))
    n = np.arange(-nmax, nmax + 1)
    if kind == "dirichlet":
        c = -sp.jv(n, ka) / sp.hankel2(n, ka)
    elif kind == "neumann":
        c = -sp.jvp(n, ka) / sp.h2vp(n, ka)
    else:  # robin: k a J' - lam a J over the same for H
        c = -(ka * sp.jvp(n, ka) - lam_a * sp.jv(n, ka)) / (ka * sp.h2vp(n, ka) - lam_a * sp.hankel2(n, ka))
    return n, c


def circle_far_field(
    ka: float, k: float, angles_deg: np.ndarray, from_deg: float, kind: str,
    center: tuple[float, float] = (0.0, 0.0), lam_a: complex = 0.0,
) -> np.ndarray:
    """Series far field of a circle centred at ``center``."""
    n, c = circle_coefficients(ka, kind, lam_a)
    phi = np.deg2rad(np.asarray(angles_deg))
    phi_i = np.deg2rad(from_deg)
    f = np.sqrt(2 / (np.pi * k)) * np.exp(0.25j * np.pi) * (
        np.exp(1j * np.outer(phi - phi_i, n)) @ ((-1.0) ** np.abs(n) * c)
    )
    # Moving the cylinder to ``center`` multiplies F by exp(j k (r_hat + d_i) . center).
    cx, cy = center
    shift = np.exp(1j * k * ((np.cos(phi) + np.cos(phi_i)) * cx + (np.sin(phi) + np.sin(phi_i)) * cy))
    return f * shift


def relative_error(f: np.ndarray, ref: np.ndarray) -> float:
    """max |F - F_ref| / max |F_ref| (complex: phase, position and conventions count)."""
    return float(np.max(np.abs(f - ref)) / np.max(np.abs(ref)))


def case(field: str, frequency_hz: float, bodies: list[dict], *, from_deg=0.0, angles=None, solver=None) -> dict:
    """A case document (as parsed TOML) with plots and VTK off."""
    doc = {
        "title": "test",
        "wave": {"field": field, "frequency_hz": frequency_hz},
        "body": bodies,
        "incident": [{"kind": "plane", "from_deg": from_deg}],
        "far_field": {"angles_deg": angles if angles is not None else {"start": 0, "stop": 360, "count": 721}},
        "output": {"plots": False, "vtk": False},
    }
    if solver:
        doc["solver"] = solver
    return doc


SQUARE = {"kind": "rectangle", "width_m": 1.0, "height_m": 1.0}
L_SHAPE = {"kind": "polygon", "points_m": [[0, 0], [1, 0], [1, 0.5], [0.5, 0.5], [0.5, 1], [0, 1]]}


def layered_circle_coefficients(
    k0: complex, beta0: complex, layers: list[tuple[float, complex, complex]], core: str, nmax: int,
    core_radius: float | None = None,
) -> tuple[np.ndarray, np.ndarray, list[np.ndarray]]:
    """Series of a circular cylinder made of concentric layers, by matching at every interface.

    ``layers`` lists ``(outer_radius, k, beta)`` from the innermost layer outward.
    ``core`` is "medium" (layers[0] is a solid core), or "dirichlet" / "neumann"
    (an impenetrable core of radius ``core_radius`` with u = 0 or du/dr = 0 inside
    layers[0]). Fields per order n (dropping j^n e^{jn(phi - phi_i)}):
    A J_n(k r) + B H_n^(2)(k r) in each layer (B = 0 in a solid core) and
    J_n(k0 r) + c_n H_n^(2)(k0 r) outside; u and beta du/dr are continuous at
    every interface (the transmission conditions of DESIGN.md's one-scalar-field
    table; Balanis, Advanced Engineering Electromagnetics, ch. 11, treats the
    one-layer and coated cases the same way). Returns n, c_n and per layer (A, B).
    """
    n = np.arange(-nmax, nmax + 1)
    radii = [r for r, _, _ in layers]
    media = [(k, b) for _, k, b in layers] + [(k0, beta0)]
    n_layers = len(layers)
    cols = [(0, 0)] if core == "medium" else [(0, 0), (0, 1)]
    for i in range(1, n_layers):
        cols += [(i, 0), (i, 1)]
    cols.append((n_layers, 1))
    c = np.empty(n.size, dtype=complex)
    coefs = [np.zeros((n.size, 2), dtype=complex) for _ in range(n_layers)]
    for row, m in enumerate(n):
        mat, rhs = _matching_system(int(m), media, radii, cols, core, core_radius)
        sol = np.linalg.solve(mat, rhs)
        for j, (lay, w) in enumerate(cols):
            if lay == n_layers:
                c[row] = sol[j]
            else:
                coefs[lay][row, w] = sol[j]
    return n, c, coefs


def _layer_basis(m: int, media, layer: int, which: int, r: float, deriv: bool) -> complex:
    """J_n (which = 0) or H_n^(2) (which = 1) of a layer at radius r, or beta times its r-derivative."""
    k, beta = media[layer]
    if which == 0:
        v = k * sp.jvp(m, k * r) * beta if deriv else sp.jv(m, k * r)
    else:
        v = k * sp.h2vp(m, k * r) * beta if deriv else sp.hankel2(m, k * r)
    return complex(v)


def _matching_system(m: int, media, radii, cols, core: str, core_radius):
    """Interface conditions of order m: rows (u, beta du/dr) per interface, plus the core's condition."""
    n_layers = len(radii)

    def basis(layer: int, which: int, r: float, deriv: bool) -> complex:
        return _layer_basis(m, media, layer, which, r, deriv)

    mat = np.zeros((len(cols), len(cols)), dtype=complex)
    rhs = np.zeros(len(cols), dtype=complex)
    eq = 0
    if core != "medium":
        for j, (lay, w) in enumerate(cols):
            if lay == 0:
                mat[eq, j] = basis(0, w, core_radius, core == "neumann")
        eq += 1
    for i in range(n_layers):
        r = radii[i]
        for deriv in (False, True):
            for j, (lay, w) in enumerate(cols):
                if lay == i:
                    mat[eq, j] -= basis(lay, w, r, deriv)
                elif lay == i + 1:
                    mat[eq, j] += basis(lay, w, r, deriv)
            if i + 1 == n_layers:  # the incident wave's part of the exterior field
                rhs[eq] -= basis(n_layers, 0, r, deriv)
            eq += 1
    return mat, rhs


def coefficients_far_field(n: np.ndarray, c: np.ndarray, k: float, angles_deg, from_deg: float) -> np.ndarray:
    """F from the series coefficients c_n of a cylinder at the origin (same normalisation as above)."""
    phi = np.deg2rad(np.asarray(angles_deg))
    phi_i = np.deg2rad(from_deg)
    return np.sqrt(2 / (np.pi * k)) * np.exp(0.25j * np.pi) * (
        np.exp(1j * np.outer(phi - phi_i, n)) @ ((-1.0) ** np.abs(n) * c)
    )
