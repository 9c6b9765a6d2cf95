"""Corners by RCIP against dyadic corner refinement: unknowns, time, identities.

Run: ``.venv/bin/python benchmarks/bench_rcip.py [--dyadic] [--ibeam]``.

Square of side 1 at ka = 5 (k = 5, a = 1), TM (Dirichlet) and TE (Neumann),
tolerances 1e-8 and 1e-12; the I-beam-like polygon (12 corners, 8 convex,
4 re-entrant, about 14 wavelengths around) with ``--ibeam``. The accuracy
figures are the reciprocity defect and the optical-theorem residual (exact
identities), and the far-field change between the two tolerances (or two
coarse meshes). ``--dyadic`` also runs today's solver (dyadic refinement
toward each corner, ``solve_problem`` with ``corners = "graded"``) at 1e-8 for comparison.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from sectionwave.engine.fields import cross_sections, far_field, plane_wave  # noqa: E402
from sectionwave.engine.mesh import BoundaryContour  # noqa: E402
from sectionwave.engine.rcip_system import rcip_solve  # noqa: E402
from sectionwave.importers.curves import Contour, Line  # noqa: E402

SQUARE = np.array([[0, 0], [1, 0], [1, 1], [0, 1]], dtype=float)
IBEAM = np.array([
    [-0.5, -0.5], [0.5, -0.5], [0.5, -0.35], [0.075, -0.35], [0.075, 0.35], [0.5, 0.35],
    [0.5, 0.5], [-0.5, 0.5], [-0.5, 0.35], [-0.075, 0.35], [-0.075, -0.35], [-0.5, -0.35],
])
GRID = np.arange(720) * 0.5
FROM = np.array([20.0, 75.0])


def boundary(vertices: np.ndarray, k: float) -> list[BoundaryContour]:
    m = len(vertices)
    con = Contour(tuple(Line(vertices[i], vertices[(i + 1) % m]) for i in range(m)))
    return [BoundaryContour(con, 0, 2 * math.pi / k)]


def rcip_case(vertices, k, kind, tol, mpw=1.0):
    t = time.perf_counter()
    sol = rcip_solve(boundary(vertices, k), k, kind, lambda p, n: plane_wave(p, n, k, FROM),
                     tolerance=tol, max_panel_wavelengths=mpw)
    elapsed = time.perf_counter() - t
    ff = far_field(sol.mesh, k, sol.u, sol.psi, GRID)
    recip = abs(ff[150, 0] - ff[40, 1]) / np.max(np.abs(ff))
    opt = float(np.max(cross_sections(sol.mesh, k, sol.u, sol.psi, FROM)["optical_residual"]))
    return sol, ff, elapsed, recip, opt


def dyadic_case(vertices, k, field, tol):
    from sectionwave.engine import parse_case, solve_problem

    from tests.reference import C0, case

    shape = {"kind": "polygon", "points_m": vertices.tolist()}
    doc = case(field, k * C0 / (2 * math.pi), [{"name": "b", "shape": shape, "boundary": "pec"}],
               angles={"start": 0, "stop": 359.5, "count": 720}, solver={"tolerance": tol, "corners": "graded"})
    doc["incident"] = [{"kind": "plane", "from_deg": FROM.tolist()}]
    t = time.perf_counter()
    fr = solve_problem(parse_case(doc).problem).frequencies[0]
    elapsed = time.perf_counter() - t
    ff = fr.farfield
    recip = abs(ff[150, 0] - ff[40, 1]) / np.max(np.abs(ff))
    return fr, ff, elapsed, recip, float(np.max(fr.cross_sections.optical_residual))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--dyadic", action="store_true", help="also run dyadic corner refinement at 1e-8")
    ap.add_argument("--ibeam", action="store_true", help="also run the I-beam polygon")
    args = ap.parse_args()
    k = 5.0
    for kind, field in (("dirichlet", "tm"), ("neumann", "te"), ("neumann-regularised", "te")):
        ffs = {}
        for tol in (1e-8, 1e-12):
            sol, ff, el, recip, opt = rcip_case(SQUARE, k, kind, tol)
            ffs[tol] = ff
            print(f"square ka=5 {field.upper()} {kind} RCIP tol={tol:.0e}: N={sol.n_unknowns} levels={sol.levels[0]} "
                  f"compressions={sol.compressions} time={el:.2f}s (compress {sol.timings_s['compress_s']:.2f}s) "
                  f"reciprocity={recip:.1e} optical={opt:.1e}")
        ch = np.max(np.abs(ffs[1e-8] - ffs[1e-12])) / np.max(np.abs(ffs[1e-12]))
        print(f"  far-field change 1e-8 -> 1e-12: {ch:.1e}")
        if args.dyadic and not kind.endswith("-regularised"):
            fr, ff, el, recip, opt = dyadic_case(SQUARE, k, field, 1e-8)
            ch = np.max(np.abs(ff - ffs[1e-12])) / np.max(np.abs(ffs[1e-12]))
            print(f"square ka=5 {field.upper()} dyadic tol=1e-8: N={fr.mesh.n_nodes} time={el:.2f}s "
                  f"reciprocity={recip:.1e} optical={opt:.1e} far field vs RCIP 1e-12: {ch:.1e}")
    if args.ibeam:
        perim = float(np.sum(np.hypot(*np.diff(np.vstack([IBEAM, IBEAM[:1]]), axis=0).T)))
        kb = 14 * 2 * math.pi / perim
        for kind, field in (("dirichlet", "tm"), ("neumann", "te"), ("neumann-regularised", "te")):
            out = {}
            for mpw in (1.0, 0.5):
                sol, ff, el, recip, opt = rcip_case(IBEAM, kb, kind, 1e-10, mpw)
                out[mpw] = ff
                print(f"I-beam {perim / (2 * math.pi / kb):.1f} wavelengths {field.upper()} {kind} RCIP tol=1e-10 "
                      f"panels<={mpw} wl: N={sol.n_unknowns} corners={len(sol.zones)} "
                      f"compressions={sol.compressions} time={el:.2f}s reciprocity={recip:.1e} optical={opt:.1e}")
            ch = np.max(np.abs(out[1.0] - out[0.5])) / np.max(np.abs(out[0.5]))
            print(f"  far-field change under coarse-mesh refinement: {ch:.1e}")


if __name__ == "__main__":
    main()
