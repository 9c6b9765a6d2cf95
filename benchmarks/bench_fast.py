"""Electrically large objects: the fast solver (GMRES + fast multipole products) against dense LU.

Items:
  1  PEC circle, ka = 1000, TM, tolerance 1e-7, 3601 far-field angles, whole
     CLI run: error against the series (Balanis ch. 11) and wall time divided
     by one LAPACK LU of a 4000 x 4000 complex matrix timed in the same run
     (goal: error <= 1e-6 and <= 20 x the LU).
  2  PEC circles of perimeter 100, 1000 and 5000 wavelengths, TM, tolerance
     1e-6: time, peak memory (VmHWM of a fresh process), iterations, error
     (goal: 5000 wavelengths to 1e-6 in under 10 minutes).
  3  The sample ribbed mast drawing at 1, 2 and 4 x its design frequency, one
     incidence, both methods where they fit: unknowns and times (the crossover).
  4  360 monostatic angles on a body 200 wavelengths around (PEC circle TE and
     2:1 ellipse TM): time per angle against a single solve.
  5  Crossover on PEC circles (one incidence, tolerance 1e-8, TM and TE): solve
     time of dense LU and of the fast solver at ka = 60, 150, 300.

Usage: .venv/bin/python benchmarks/bench_fast.py [--items 1,2,3,4,5] [--quick]
"""

from __future__ import annotations

import argparse
import json
import math
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(HERE))

from bench_corners import EXE, lu_time  # noqa: E402

from tests.reference import C0, circle_far_field, relative_error  # noqa: E402

_CIRCLE = textwrap.dedent(
    """
    import json, math, sys, time
    import numpy as np
    from sectionwave.engine.mesh import BoundaryContour, build_panels
    from sectionwave.engine.system import BoundarySystem
    from sectionwave.engine.formulations import Dirichlet, Neumann
    from sectionwave.engine.fast import FastMultipole
    from sectionwave.engine.fields import far_field
    from sectionwave.engine.solve import solve_boundary
    from sectionwave.engine.problem import IncidentWave
    from sectionwave.importers.curves import Contour, EllipticalArc, circular_arc

    # ka: the circle's k a, or the ellipse's perimeter in wavelengths
    ka, field, tol, n_inc, shape = float(sys.argv[1]), sys.argv[2], float(sys.argv[3]), int(sys.argv[4]), sys.argv[5]
    t0 = time.perf_counter()
    if shape == "circle":
        contour = Contour((circular_arc((0.0, 0.0), 1.0, 0.0, 2 * math.pi),))
        k = ka
    else:  # 2:1 ellipse, semi-axes 1.0 and 0.5: perimeter 4.8442 (Ramanujan), so k = 2 pi ka / 4.8442
        contour = Contour((EllipticalArc(np.zeros(2), np.diag([1.0, 0.5]), 0.0, 2 * math.pi),))
        k = 2 * math.pi * ka / 4.8442
    mesh = build_panels([BoundaryContour(contour, 0, 2 * math.pi / k)], tolerance=tol)
    system = BoundarySystem(mesh, [Dirichlet() if field == "tm" else Neumann()], k)
    inc = [IncidentWave(f"p{i}", "plane", from_deg=360.0 * i / n_inc) for i in range(n_inc)]
    t1 = time.perf_counter()
    sol = solve_boundary(system, inc, solver=FastMultipole(tol))
    t2 = time.perf_counter()
    angles = np.linspace(0.0, 360.0, 3601)
    ff = far_field(mesh, k, sol.u[:, :1], sol.dudn[:, :1], angles)[:, 0]
    t3 = time.perf_counter()
    peak = 0
    for line in open("/proc/self/status"):
        if line.startswith("VmHWM:"):
            peak = int(line.split()[1]) * 1024
    np.save(sys.argv[6], ff)
    print(json.dumps({"n": system.n_unknowns, "mesh_s": t1 - t0, "solve_s": t2 - t1, "far_s": t3 - t2,
                      "iterations": sol.report.iterations, "peak_bytes": peak}))
    """
)


def circle_run(ka: float, field: str, tol: float, n_inc: int = 1, shape: str = "circle") -> dict:
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "ff.npy"
        out = subprocess.run([sys.executable, "-c", _CIRCLE, str(ka), field, str(tol), str(n_inc), shape, str(path)],
                             capture_output=True, text=True, check=True)
        figures = json.loads(out.stdout.strip().splitlines()[-1])
        figures["farfield"] = np.load(path)
    return figures


def item1(lu: float) -> None:
    ka = 1000.0
    freq = ka * C0 / (2 * math.pi)
    text = textwrap.dedent(
        f"""
        title = "PEC circle, ka = 1000"
        [wave]
        field = "tm"
        frequency_hz = {freq!r}
        [[body]]
        name = "c"
        shape = {{ kind = "circle", radius_m = 1.0 }}
        boundary = "pec"
        [[incident]]
        kind = "plane"
        from_deg = 0
        [far_field]
        angles_deg = {{ start = 0, stop = 360, count = 3601 }}
        [solver]
        tolerance = 1e-7
        [output]
        plots = false
        vtk = false
        surface_csv = false
        """
    )
    with tempfile.TemporaryDirectory() as tmp:
        case = Path(tmp) / "c.toml"
        case.write_text(text)
        out = Path(tmp) / "out"
        t = time.perf_counter()
        proc = subprocess.run([EXE, "run", str(case), "--out", str(out), "--quiet"], capture_output=True, text=True)
        wall = time.perf_counter() - t
        if proc.returncode not in (0, 3):
            raise SystemExit(proc.stderr)
        from sectionwave.engine.export import read_csv

        table = read_csv(out / "farfield.csv")
        summary = json.loads((out / "summary.json").read_text())
    k = 2 * math.pi * freq / C0
    ff = table["farfield_re_sqrt_m"] + 1j * table["farfield_im_sqrt_m"]
    err = relative_error(ff, circle_far_field(ka, k, table["angle_deg"], 0.0, "dirichlet"))
    fr = summary["frequencies"][0]
    print(f"item 1: PEC circle ka = 1000 TM, tol 1e-7, 3601 angles, CLI: {fr['unknowns']} unknowns, "
          f"{fr['solver_method']}, iterations {fr['iterations']}, error {err:.1e}, wall {wall:.1f} s = "
          f"{wall / lu:.1f} x LU(4000) (goal <= 1e-6 and <= 20 x)", flush=True)


def item2(quick: bool) -> None:
    for perimeter in ([100, 1000] if quick else [100, 1000, 5000]):
        fig = circle_run(float(perimeter), "tm", 1e-6)
        ref = circle_far_field(float(perimeter), float(perimeter), np.linspace(0.0, 360.0, 3601), 0.0, "dirichlet")
        err = relative_error(fig["farfield"], ref)
        print(f"item 2: circle {perimeter} wavelengths TM 1e-6: N = {fig['n']}, solve {fig['solve_s']:.1f} s "
              f"(+ mesh {fig['mesh_s']:.1f} s, far field {fig['far_s']:.1f} s), iterations {fig['iterations']}, "
              f"peak {fig['peak_bytes'] / 2**30:.2f} GiB, error {err:.1e}", flush=True)


def item3() -> None:
    base = (ROOT / "samples" / "ribbed_mast_dxf.toml").read_text()
    base = base.replace("from_deg = { start = 0, stop = 90, count = 19 }", "from_deg = 30")
    base = base.replace('file = "drawings/ribbed_mast.dxf"', f'file = "{ROOT / "samples" / "drawings" / "ribbed_mast.dxf"}"')
    for factor in (1, 2, 4):
        line = []
        for method in ("dense", "fast"):
            text = base.replace("frequency_hz = 9.4e9", f"frequency_hz = {9.4e9 * factor!r}")
            text += f'\n[solver]\nmethod = "{method}"\n[output]\nplots = false\nvtk = false\n'
            with tempfile.TemporaryDirectory() as tmp:
                case = Path(tmp) / "c.toml"
                case.write_text(text)
                out = Path(tmp) / "out"
                t = time.perf_counter()
                proc = subprocess.run([EXE, "run", str(case), "--out", str(out), "--quiet"],
                                      capture_output=True, text=True)
                wall = time.perf_counter() - t
                if proc.returncode not in (0, 3):
                    line.append(f"{method}: refused ({proc.stderr.strip()[:80]})")
                    continue
                fr = json.loads((out / "summary.json").read_text())["frequencies"][0]
                line.append(f"{method} {fr['unknowns']} unknowns {wall:.1f} s (estimate {fr['estimated_error']:.0e})")
        print(f"item 3: ribbed mast at {factor} x 9.4 GHz: " + "; ".join(line), flush=True)


def item4(quick: bool) -> None:
    n_angles = 60 if quick else 360
    for shape, field in (("circle", "te"), ("ellipse", "tm")):
        one = circle_run(200.0, field, 1e-6, 1, shape)
        many = circle_run(200.0, field, 1e-6, n_angles, shape)
        its = many["iterations"]
        print(f"item 4: {shape} 200 wavelengths {field.upper()}: one solve {one['solve_s']:.1f} s "
              f"({one['iterations'][0]} iterations); {n_angles} angles {many['solve_s']:.1f} s = "
              f"{many['solve_s'] / n_angles:.2f} s per angle = {many['solve_s'] / n_angles / one['solve_s']:.2f} x "
              f"a single solve; iterations first {its[0]}, mean of the last half "
              f"{np.mean(its[len(its) // 2:]):.1f}", flush=True)


def item5() -> None:
    from sectionwave.engine.fast import FastMultipole
    from sectionwave.engine.formulations import Dirichlet, Neumann
    from sectionwave.engine.mesh import BoundaryContour, build_panels
    from sectionwave.engine.problem import IncidentWave
    from sectionwave.engine.solve import DenseLU, solve_boundary
    from sectionwave.engine.system import BoundarySystem
    from sectionwave.importers.curves import Contour, circular_arc

    incident = [IncidentWave("p", "plane", from_deg=0.0)]
    for field in ("tm", "te"):
        for ka in (60.0, 150.0, 300.0):
            contour = Contour((circular_arc((0.0, 0.0), 1.0, 0.0, 2 * math.pi),))
            mesh = build_panels([BoundaryContour(contour, 0, 2 * math.pi / ka)], tolerance=1e-8)
            system = BoundarySystem(mesh, [Dirichlet() if field == "tm" else Neumann()], ka)
            times = []
            for solver in (DenseLU(), FastMultipole(1e-8)):
                t = time.perf_counter()
                solve_boundary(system, incident, solver=solver)
                times.append(time.perf_counter() - t)
            print(f"item 5: circle ka = {ka:g} {field.upper()}, N = {system.n_unknowns}: dense {times[0]:.2f} s, "
                  f"fast {times[1]:.2f} s", flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--items", default="1,2,3,4,5")
    parser.add_argument("--quick", action="store_true", help="smaller sizes")
    args = parser.parse_args()
    items = {int(i) for i in args.items.split(",")}
    lu = lu_time()
    print(f"LAPACK LU of a 4000 x 4000 complex matrix: {lu:.2f} s (best of 2)", flush=True)
    if 1 in items:
        item1(lu)
    if 2 in items:
        item2(args.quick)
    if 3 in items:
        item3()
    if 4 in items:
        item4(args.quick)
    if 5 in items:
        item5()


if __name__ == "__main__":
    main()
