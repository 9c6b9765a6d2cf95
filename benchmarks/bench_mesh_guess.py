"""The mesher's first guess: unknowns per wavelength chosen by the tool against the fewest that suffice.

For a PEC circle (radius 1) and a 2:1 ellipse (semi-axes 1 and 0.5, turned
by 20 degrees) at ka = 50 and 500 (k a with a the largest semi-axis), TM and
TE, lit from 30 degrees, tolerances 1e-6, 1e-8 and 1e-10:

* tool: the run as a user would start it (only ``tolerance`` set): unknowns
  per wavelength of the accepted mesh, refinements, the run's own estimate
  and the error reached;
* fewest: the fewest unknowns per wavelength that reach the tolerance,
  found by scanning ``max_panel_wavelengths`` (no refinement, the same
  tolerance for the geometry) by factors of ``--step`` from the tool's
  first guess: coarser while the tolerance is met, finer until it is;
* ratio: tool / fewest (goal: at most 1.2), and whether the estimate is at
  least the error (it must be).

Errors are ``max |F - F_ref| / max |F_ref|`` over 721 far-field angles;
F_ref is the circle's series (Balanis, Advanced Engineering
Electromagnetics, ch. 11, tests/reference.py) or, for the ellipse, a much
finer run of the same solver (0.7-wavelength panels, no refinement).

Usage: .venv/bin/python benchmarks/bench_mesh_guess.py [--quick] [--ka 50,500]
       [--fields tm,te] [--shapes circle,ellipse] [--raw scan.jsonl] [--reuse scan.jsonl]
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import time
import warnings

import numpy as np
import scipy.special as sp

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

from sectionwave.engine import parse_case, solve_problem  # noqa: E402
from sectionwave.engine.adapt import panel_estimates  # noqa: E402
from sectionwave.engine.run import panel_wavelengths  # noqa: E402

from tests.reference import C0, case, circle_far_field, relative_error  # noqa: E402

SHAPES = {
    "circle": {"kind": "circle", "radius_m": 1.0},
    "ellipse": {"kind": "ellipse", "semi_axes_m": [1.0, 0.5], "rotation_deg": 20.0},
}
TOLERANCES = (1e-6, 1e-8, 1e-10)
FROM_DEG = 30.0


def perimeter_wavelengths(shape: str, ka: float) -> float:
    """Perimeter in wavelengths (ellipse: 4 a E(e^2), DLMF 19.9.9)."""
    perimeter = 2 * math.pi if shape == "circle" else 4.0 * float(sp.ellipe(1.0 - 0.25))
    return perimeter * ka / (2 * math.pi)


def solve(shape: str, field: str, ka: float, solver: dict):
    doc = case(field, ka * C0 / (2 * math.pi), [{"name": "b", "shape": SHAPES[shape], "boundary": "pec"}],
               from_deg=FROM_DEG, solver=solver)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t = time.perf_counter()
        fr = solve_problem(parse_case(doc).problem).frequencies[0]
    return fr, time.perf_counter() - t


def reference(shape: str, field: str, ka: float, angles: np.ndarray) -> np.ndarray:
    if shape == "circle":
        return circle_far_field(ka, ka, angles, FROM_DEG, "dirichlet" if field == "tm" else "neumann")
    fr, _ = solve(shape, field, ka, {"tolerance": 1e-11, "max_panel_wavelengths": 0.7, "max_refinements": 0})
    return fr.farfield[:, 0]


def plain_sum(fr, field: str) -> float:
    """The plain (uncalibrated) sum of the panel estimates, for calibration records."""
    x = (fr.dudn if field == "tm" else fr.u)[:, :1]
    return float(np.sum(panel_estimates(fr.mesh, [x])))


def scan(shape: str, field: str, ka: float, tol: float, start: float, ref: np.ndarray, step: float, raw):
    """Uniform meshes (no refinement) around ``start`` wavelengths per panel.

    From ``start``, coarser by ``1 / step`` while the error stays within
    ``tol``; if ``start`` misses it, finer by ``step`` until it is met.
    """
    rows: list[dict] = []
    seen: set[int] = set()

    def measure(mpw: float) -> dict | None:
        fr, wall = solve(shape, field, ka, {"tolerance": tol, "max_panel_wavelengths": mpw, "max_refinements": 0})
        if fr.unknowns in seen:
            return None
        seen.add(fr.unknowns)
        row = {"shape": shape, "field": field, "ka": ka, "tol": tol, "mpw": mpw, "panels": fr.mesh.n_panels,
               "upw": fr.unknowns / perimeter_wavelengths(shape, ka),
               "err": relative_error(fr.farfield[:, 0], ref),
               "estimate": fr.estimated_error, "plain_sum": plain_sum(fr, field), "wall_s": wall}
        rows.append(row)
        if raw is not None:
            raw.write(json.dumps(row) + "\n")
            raw.flush()
        return row

    first = measure(start)
    assert first is not None
    mpw = start
    if first["err"] <= tol:
        while mpw < 4.0:
            mpw /= step
            row = measure(mpw)
            if row is not None and row["err"] > tol:
                break
    else:
        while mpw > 0.3:
            mpw *= step
            row = measure(mpw)
            if row is not None and row["err"] <= tol:
                break
    return rows


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="ka = 50 only")
    ap.add_argument("--ka", default="50,500")
    ap.add_argument("--fields", default="tm,te")
    ap.add_argument("--shapes", default="circle,ellipse")
    ap.add_argument("--step", type=float, default=0.95, help="factor between scanned panel lengths")
    ap.add_argument("--raw", default=None, help="write every scanned mesh as JSON lines here")
    ap.add_argument("--reuse", default=None,
                    help="take the scans from this --raw file of an earlier run where it has them "
                         "(the scans do not depend on the tool's rule or estimate, only on where they start)")
    args = ap.parse_args()
    kas = [50.0] if args.quick else [float(v) for v in args.ka.split(",")]
    raw = open(args.raw, "w") if args.raw else None
    earlier: list[dict] = []
    if args.reuse:
        with open(args.reuse) as fh:
            earlier = [json.loads(line) for line in fh if line.strip()]
    solve("circle", "tm", 5.0, {})  # compile the kernels before timing anything
    print("shape    field    ka   tol     tool upw  refs  estimate  error     honest  fewest upw  ratio  tool s")
    ratios = []
    for shape in args.shapes.split(","):
        for ka in kas:
            for field in args.fields.split(","):
                fr0, _ = solve(shape, field, ka, {"tolerance": 1e-6, "max_refinements": 0})
                ref = reference(shape, field, ka, fr0.angles_deg)
                for tol in TOLERANCES:
                    fr, wall = solve(shape, field, ka, {"tolerance": tol})
                    err = relative_error(fr.farfield[:, 0], ref)
                    upw = fr.unknowns / perimeter_wavelengths(shape, ka)
                    rule = panel_wavelengths(parse_case(case(field, 1.0, [{"name": "b", "shape": SHAPES[shape],
                                                                              "boundary": "pec"}],
                                                             solver={"tolerance": tol})).problem)
                    rows = [r for r in earlier if (r["shape"], r["field"], r["ka"], r["tol"]) == (shape, field, ka, tol)]
                    if not rows:
                        rows = scan(shape, field, ka, tol, rule, ref, args.step, raw)
                    meet = [r["upw"] for r in rows if r["err"] <= tol]
                    fewest = min(meet) if meet else float("nan")
                    ratios.append(upw / fewest)
                    print(f"{shape:8s} {field:5s} {ka:5.0f}  {tol:.0e}  {upw:8.2f}  {fr.refinements:4d}  "
                          f"{fr.estimated_error:.1e}  {err:.1e}  {'yes' if fr.estimated_error >= err else 'NO':6s}  "
                          f"{fewest:10.2f}  {upw / fewest:5.2f}  {wall:6.1f}", flush=True)
    if raw is not None:
        raw.close()
    finite = [r for r in ratios if math.isfinite(r)]
    print(f"\nworst tool / fewest: {max(finite):.2f} (goal 1.20: {'met' if max(finite) <= 1.2 else 'NOT met'}); "
          f"median {float(np.median(finite)):.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
