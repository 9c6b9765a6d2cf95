"""Time a 1000 x 1000 near-field grid around a PEC circle with about 4000 unknowns.

Prints the mesh size, the time of each stage and the largest error of the
scattered field against the series solution (Balanis, Advanced Engineering
Electromagnetics, ch. 11) on a ring 1e-3 wavelengths outside the surface
and on a sample of grid points.

Usage: ``python benchmarks/bench_nearfield.py [--n-grid 1000] [--ka 250]
[--traces solve|series] [--kind tm|te]``. ``series`` takes the surface traces
from the series (no dense solve), which isolates the evaluation error.
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import scipy.special as sp
from sectionwave.engine.formulations import Dirichlet, Neumann
from sectionwave.engine.mesh import BoundaryContour, build_panels
from sectionwave.engine.nearfield import field_on_grid, inside_mask, scattered_field
from sectionwave.engine.problem import IncidentWave
from sectionwave.engine.solve import solve_boundary
from sectionwave.engine.system import BoundarySystem
from sectionwave.importers.curves import Contour, circular_arc

FROM_DEG = 30.0


def _coefficients(ka: float, kind: str) -> tuple[np.ndarray, np.ndarray]:
    nmax = int(ka + 40 + 3 * ka ** (1 / 3))
    n = np.arange(-nmax, nmax + 1)
    if kind == "tm":
        return n, sp.jv(n, ka) / sp.hankel2(n, ka)
    return n, sp.jvp(n, ka) / sp.h2vp(n, ka)


def series_scattered(k: float, a: float, pts: np.ndarray, kind: str) -> np.ndarray:
    """Series scattered field of the PEC circle of radius ``a`` at the origin."""
    n, c = _coefficients(k * a, kind)
    r = np.hypot(pts[:, 0], pts[:, 1])
    phi = np.arctan2(pts[:, 1], pts[:, 0]) - np.deg2rad(FROM_DEG)
    out = np.empty(pts.shape[0], dtype=complex)
    for lo in range(0, pts.shape[0], 500):
        sl = slice(lo, lo + 500)
        h = sp.hankel2(n[None, :], k * r[sl, None])
        e = np.exp(1j * n[None, :] * phi[sl, None])
        out[sl] = -np.sum((1j**n * c)[None, :] * h * e, axis=1)
    return out


def series_traces(
    k: float, a: float, nodes: np.ndarray, kind: str
) -> tuple[np.ndarray, np.ndarray]:
    """Total ``u`` and ``du/dr`` on the circle from the series."""
    n, c = _coefficients(k * a, kind)
    phi = np.arctan2(nodes[:, 1], nodes[:, 0]) - np.deg2rad(FROM_DEG)
    e = (1j**n)[None, :] * np.exp(1j * n[None, :] * phi[:, None])
    ka = k * a
    u = e @ (sp.jv(n, ka) - c * sp.hankel2(n, ka))
    du = k * (e @ (sp.jvp(n, ka) - c * sp.h2vp(n, ka)))
    if kind == "tm":
        u = np.zeros_like(u)
    else:
        du = np.zeros_like(du)
    return u[:, None], du[:, None]


def main() -> None:
    """Run the benchmark."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n-grid", type=int, default=1000)
    ap.add_argument("--ka", type=float, default=250.0)
    ap.add_argument("--kind", choices=("tm", "te"), default="tm")
    ap.add_argument("--traces", choices=("solve", "series"), default="solve")
    args = ap.parse_args()
    a = 1.0
    k = args.ka / a
    lam = 2 * np.pi / k
    t = time.perf_counter()
    contour = Contour((circular_arc((0.0, 0.0), a, 0.0, 2 * np.pi),))
    mesh = build_panels([BoundaryContour(contour, 0, lam)], tolerance=1e-8)
    print(f"ka = {args.ka:g}, {args.kind}, N = {mesh.n_nodes} unknowns "
          f"({mesh.n_panels} panels), mesh {time.perf_counter() - t:.1f} s")
    t = time.perf_counter()
    if args.traces == "solve":
        system = BoundarySystem(mesh, [Dirichlet() if args.kind == "tm" else Neumann()], k)
        solution = solve_boundary(system, [IncidentWave("bench", "plane", from_deg=FROM_DEG)])
        u, psi = solution.u, solution.dudn
        del solution
    else:
        u, psi = series_traces(k, a, mesh.nodes, args.kind)
    print(f"surface traces ({args.traces}): {time.perf_counter() - t:.1f} s")

    phi_i = np.deg2rad(FROM_DEG)
    direction = np.array([np.cos(phi_i), np.sin(phi_i)])

    def incident(points: np.ndarray) -> np.ndarray:
        return np.exp(1j * k * (points @ direction))[:, None]

    # Warm the compiled loops so the timing is of the evaluation alone.
    scattered_field(mesh, k, u, psi, np.array([[2.0 * a, 0.0], [a + 1e-3 * lam, 0.0]]))
    x = np.linspace(-1.5 * a, 1.5 * a, args.n_grid)
    t, c = time.perf_counter(), time.process_time()
    res = field_on_grid(mesh, k, u, psi, incident, x, x)
    dt, dc = time.perf_counter() - t, time.process_time() - c
    n_out = int((~res["inside"]).sum())
    print(f"grid {args.n_grid} x {args.n_grid} ({n_out} points outside): {dt:.1f} s wall, "
          f"{dc:.1f} s CPU")
    gy, gx = np.meshgrid(x, x, indexing="ij")
    grid_pts = np.column_stack([gx.ravel(), gy.ravel()])
    t = time.perf_counter()
    inside_mask(mesh, grid_pts)
    print(f"  of which inside_mask: {time.perf_counter() - t:.1f} s")

    rng = np.random.default_rng(1)
    phi = rng.uniform(0.0, 2 * np.pi, 400)
    for dist in (1e-3, 1e-2, 1.0):
        ring = (a + dist * lam) * np.column_stack([np.cos(phi), np.sin(phi)])
        t = time.perf_counter()
        got = scattered_field(mesh, k, u, psi, ring)[:, 0]
        dt = time.perf_counter() - t
        err = np.max(np.abs(got - series_scattered(k, a, ring, args.kind)))
        print(f"ring at {dist:g} wavelengths: max |error| = {err:.2e} (|u_inc| = 1), {dt:.2f} s")
    out = np.flatnonzero(~res["inside"].ravel())
    pick = rng.choice(out, size=min(2000, out.size), replace=False)
    pts = np.column_stack([gx.ravel()[pick], gy.ravel()[pick]])
    ref = series_scattered(k, a, pts, args.kind)
    err = np.max(np.abs(res["scattered"].reshape(-1)[pick] - ref))
    print(f"grid sample of {pick.size} points: max |error| = {err:.2e}")


if __name__ == "__main__":
    main()
