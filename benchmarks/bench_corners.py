"""Corners through the command line: compressed (RCIP) against graded refinement, in one run.

Items:
  1  I-beam section, 12 sharp corners (8 convex, 4 re-entrant), about 14
     wavelengths around, TM and TE, three incidences, tolerance 1e-8: unknowns,
     wall time of the whole CLI run, and that time divided by one LAPACK LU of a
     4000 x 4000 complex matrix timed in the same run (goal: <= 2000 unknowns
     and <= 2 x the LU).
  2  The sample ribbed mast (samples/ribbed_mast_dxf.toml) and a 48-corner star
     10 wavelengths across, tolerance 1e-8: unknowns and time, compressed and
     (with --graded) graded corners.

Usage: .venv/bin/python benchmarks/bench_corners.py [--items 1,2] [--graded]
"""

from __future__ import annotations

import argparse
import json
import math
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import scipy.linalg as la

ROOT = Path(__file__).resolve().parents[1]
EXE = str(Path(sys.executable).with_name("sectionwave"))
C0 = 299_792_458.0


def lu_time(n: int = 4000) -> float:
    rng = np.random.default_rng(1)
    a = rng.standard_normal((n, n)) + 1j * rng.standard_normal((n, n))
    best = math.inf
    for _ in range(2):
        b = a.copy(order="F")
        t = time.perf_counter()
        la.lu_factor(b, overwrite_a=True, check_finite=False)
        best = min(best, time.perf_counter() - t)
    return best


def run_case(text: str, folder: Path, name: str) -> tuple[float, dict]:
    case = folder / f"{name}.toml"
    case.write_text(text, encoding="utf-8")
    out = folder / f"{name}-out"
    t = time.perf_counter()
    proc = subprocess.run([EXE, "run", str(case), "--out", str(out), "--force", "--quiet"],
                          capture_output=True, text=True)
    wall = time.perf_counter() - t
    if proc.returncode not in (0, 3):
        raise SystemExit(f"{name}: exit {proc.returncode}: {proc.stderr.strip()}")
    return wall, json.loads((out / "summary.json").read_text())


def i_beam_points() -> list[list[float]]:
    # 1 m flanges and height, 0.15 m flanges, 0.15 m web: 12 corners
    b, h, tf, tw = 1.0, 1.0, 0.15, 0.15
    x, y, w = b / 2, h / 2, tw / 2
    return [[-x, -y], [x, -y], [x, -y + tf], [w, -y + tf], [w, y - tf], [x, y - tf], [x, y], [-x, y],
            [-x, y - tf], [-w, y - tf], [-w, -y + tf], [-x, -y + tf]]


def case_text(field: str, frequency: float, shape: str, corners: str, incidents: str = "[0, 45, 90]") -> str:
    return f"""title = "benchmark"
[wave]
field = "{field}"
frequency_hz = {frequency!r}
[[body]]
name = "b"
shape = {shape}
boundary = "pec"
[[incident]]
kind = "plane"
from_deg = {incidents}
[solver]
tolerance = 1e-8
corners = "{corners}"
[output]
plots = false
vtk = false
"""


def item_beam(folder: Path, lu: float, graded: bool) -> None:
    pts = i_beam_points()
    perim = sum(math.dist(pts[i], pts[(i + 1) % len(pts)]) for i in range(len(pts)))
    freq = 14 * C0 / perim
    shape = "{ kind = \"polygon\", points_m = " + json.dumps(pts) + " }"
    print(f"\n1. I-beam, 12 corners, {perim:.2f} m around = 14 wavelengths, three incidences, tolerance 1e-8")
    for field in ("tm", "te"):
        for corners in ("compressed", "graded") if graded else ("compressed",):
            wall, summary = run_case(case_text(field, freq, shape, corners), folder, f"beam-{field}-{corners}")
            fr = summary["frequencies"][0]
            print(f"  {field.upper()} {corners:10s}: {fr['unknowns']:6d} unknowns, CLI {wall:6.1f} s = "
                  f"{wall / lu:5.2f} x LU(4000), estimate {fr['estimated_error']:.1e}", flush=True)


def item_mast_star(folder: Path, graded: bool) -> None:
    print("\n2. Sample ribbed mast (DXF, TE, 19 incidences) and a 48-corner star, tolerance 1e-8")
    text = (ROOT / "samples" / "ribbed_mast_dxf.toml").read_text(encoding="utf-8")
    text = text.replace('file = "drawings/', f'file = "{ROOT / "samples" / "drawings"}/')
    n = 24
    star = [[(1.0 if i % 2 == 0 else 0.6) * math.cos(math.pi * i / n), (1.0 if i % 2 == 0 else 0.6) * math.sin(math.pi * i / n)]
            for i in range(2 * n)]
    freq = 10 * C0 / 2.0  # 10 wavelengths across its 2 m
    shape = "{ kind = \"polygon\", points_m = " + json.dumps(star) + " }"
    for corners in ("compressed", "graded") if graded else ("compressed",):
        mast = text.replace("[far_field]", f"[solver]\ncorners = \"{corners}\"\n[output]\nplots = false\nvtk = false\n\n[far_field]")
        wall, summary = run_case(mast, folder, f"mast-{corners}")
        fr = summary["frequencies"][0]
        print(f"  ribbed mast {corners:10s}: {fr['unknowns']:6d} unknowns, {wall:6.1f} s, "
              f"estimate {fr['estimated_error']:.1e}", flush=True)
        wall, summary = run_case(case_text("tm", freq, shape, corners, "[0]"), folder, f"star-{corners}")
        fr = summary["frequencies"][0]
        print(f"  48-corner star {corners:10s}: {fr['unknowns']:6d} unknowns, {wall:6.1f} s, "
              f"estimate {fr['estimated_error']:.1e}", flush=True)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--items", default="1,2")
    ap.add_argument("--graded", action="store_true", help="also run graded corners (slow: minutes)")
    args = ap.parse_args()
    items = {int(i) for i in args.items.split(",")}
    lu = lu_time()
    print(f"LAPACK LU of a 4000 x 4000 complex matrix: {lu:.2f} s (best of 2); "
          f"{os.cpu_count()} cores")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        # fill numba's cache before anything is timed
        run_case(case_text("tm", C0, "{ kind = \"circle\", radius_m = 0.1 }", "compressed", "[0]"), folder, "warm")
        if 1 in items:
            item_beam(folder, lu, args.graded)
        if 2 in items:
            item_mast_star(folder, args.graded)


if __name__ == "__main__":
    main()
