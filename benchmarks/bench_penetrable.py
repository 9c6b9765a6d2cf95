"""Penetrable bodies: unknowns, time, accuracy and conditioning, measured in one run.

Items:
  1  Dielectric cylinder eps_r = 10, ka = 20, TM and TE, tolerance 1e-8: unknowns per
     interior wavelength, wall time, error against the layered series.
  2  Condition estimate of the interface system against ka (eps_r = 2, TM), ka up to
     --max-ka (default 100): it should stay bounded (second-kind equations).
  3  A coated I-beam (PEC section with a 2 mm lossy coating, eps_r = 4 - 0.4j) at
     10 GHz, TE: unknowns and time.

Usage: .venv/bin/python benchmarks/bench_penetrable.py [--items 1,2,3] [--max-ka 100] [--beam-tol 1e-6]
"""

from __future__ import annotations

import argparse
import math
import os
import sys
import time
import warnings

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

from sectionwave.engine import parse_case, solve_problem  # noqa: E402

from tests.reference import C0, coefficients_far_field, layered_circle_coefficients, relative_error  # noqa: E402


def _doc(field, freq, bodies, tol=1e-8):
    return {
        "title": "bench", "wave": {"field": field, "frequency_hz": freq}, "body": bodies,
        "incident": [{"kind": "plane", "from_deg": 30.0}],
        "far_field": {"angles_deg": {"start": 0, "stop": 360, "count": 721}},
        "solver": {"tolerance": tol}, "output": {"plots": False, "vtk": False},
    }


def item_cylinder() -> None:
    print("\n1. Dielectric cylinder eps_r = 10, ka = 20, tolerance 1e-8 (radius 1 m)")
    ka, eps = 20.0, 10.0
    for field in ("tm", "te"):
        body = {"name": "d", "shape": {"kind": "circle", "radius_m": 1.0}, "boundary": "penetrable", "eps_r": eps}
        t = time.perf_counter()
        fr = solve_problem(parse_case(_doc(field, ka * C0 / (2 * math.pi), [body])).problem).frequencies[0]
        wall = time.perf_counter() - t
        beta = 1.0 if field == "tm" else 1.0 / eps
        n, c, _ = layered_circle_coefficients(ka, 1.0, [(1.0, ka * math.sqrt(eps), beta)], "medium", 100)
        err = relative_error(fr.farfield[:, 0], coefficients_far_field(n, c, ka, fr.angles_deg, 30.0))
        interior_wl = 2 * math.pi * 1.0 / (2 * math.pi / (ka * math.sqrt(eps)))
        print(f"  {field.upper()}: {fr.unknowns} unknowns ({fr.mesh.n_nodes} nodes), "
              f"{fr.mesh.n_nodes / interior_wl:.1f} nodes per interior wavelength, {wall:.1f} s, "
              f"error vs series {err:.1e}, estimate {fr.estimated_error:.1e}, cond {fr.condition_estimate:.1e}")


def item_condition(max_ka: float) -> None:
    print(f"\n2. Condition estimate against ka (eps_r = 2, TM, tolerance 1e-8), up to ka = {max_ka:g}")
    for ka in [k for k in (1.0, 5.0, 20.0, 50.0, 100.0, 200.0) if k <= max_ka]:
        body = {"name": "d", "shape": {"kind": "circle", "radius_m": 1.0}, "boundary": "penetrable", "eps_r": 2.0}
        t = time.perf_counter()
        fr = solve_problem(parse_case(_doc("tm", ka * C0 / (2 * math.pi), [body])).problem).frequencies[0]
        print(f"  ka = {ka:6.1f}: N = {fr.unknowns:6d}, condition {fr.condition_estimate:.2e}, "
              f"{time.perf_counter() - t:.1f} s", flush=True)


def _i_beam(b: float, h: float, tf: float, tw: float) -> list[list[float]]:
    x, y = b / 2, h / 2
    w = tw / 2
    return [[-x, -y], [x, -y], [x, -y + tf], [w, -y + tf], [w, y - tf], [x, y - tf], [x, y], [-x, y],
            [-x, y - tf], [-w, y - tf], [-w, -y + tf], [-x, -y + tf]]


def item_beam(tol: float) -> None:
    from shapely.geometry import Polygon

    print(f"\n3. Coated I-beam at 10 GHz, TE, tolerance {tol:g}: 70 x 70 mm, flanges 8 mm, web 6 mm,"
          " 2 mm coating eps_r = 4 - 0.4j")
    steel = _i_beam(0.07, 0.07, 0.008, 0.006)
    coat = Polygon(steel).buffer(0.002, join_style=2)  # mitred: the coating keeps sharp corners
    outline = [list(p) for p in list(coat.exterior.coords)[:-1]]
    bodies = [
        {"name": "coating", "shape": {"kind": "polygon", "points_m": outline}, "boundary": "penetrable",
         "eps_r": [4.0, -0.4]},
        {"name": "beam", "shape": {"kind": "polygon", "points_m": steel}, "boundary": "pec"},
    ]
    t = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fr = solve_problem(parse_case(_doc("te", 10e9, bodies, tol)).problem).frequencies[0]
    print(f"  {fr.unknowns} unknowns, {time.perf_counter() - t:.1f} s, estimate {fr.estimated_error:.1e}, "
          f"optical residual {float(np.max(fr.cross_sections.optical_residual)):.1e}, "
          f"absorption {fr.cross_sections.absorption_width_m[0]:.3e} m vs surface flux "
          f"{fr.cross_sections.surface_absorption_m[0]:.3e} m")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--items", default="1,2,3")
    ap.add_argument("--max-ka", type=float, default=100.0)
    ap.add_argument("--beam-tol", type=float, default=1e-6)
    args = ap.parse_args()
    items = {int(i) for i in args.items.split(",")}
    # compile the kernels before anything is timed
    solve_problem(parse_case(_doc("tm", C0 / (2 * math.pi), [{"name": "w", "shape": {"kind": "circle", "radius_m": 1.0},
                                                             "boundary": "penetrable", "eps_r": 2.0}], 1e-4)).problem)
    if 1 in items:
        item_cylinder()
    if 2 in items:
        item_condition(args.max_ka)
    if 3 in items:
        item_beam(args.beam_tol)


if __name__ == "__main__":
    main()
