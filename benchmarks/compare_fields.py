"""Far and near fields of a PEC circle (TM and TE), saved to or compared with an .npz file.

A regression check for changes that should only move results at rounding
level (the kernels' Bessel functions, quadrature, threading):

    python benchmarks/compare_fields.py save before.npz     # on the old code
    python benchmarks/compare_fields.py compare before.npz  # on the new code

It prints ``max |after - before| / max |before|`` for the far field (721
angles, two incidences) and the scattered near field (61 x 61 grid, NaN
inside the body). For scale, the same code run with one thread instead of
two differs by about 1e-14 (TM) and 1e-15 (TE): LU and BLAS sum in a
different order.
"""

from __future__ import annotations

import sys

import numpy as np
import tomllib
from sectionwave.engine import parse_case, solve_problem

CASE = """
title = "compare"
[wave]
field = "{field}"
frequency_hz = 3e9
[[body]]
name = "post"
shape = {{ kind = "circle", radius_m = 0.1 }}
boundary = "pec"
[[incident]]
kind = "plane"
from_deg = [0, 30]
[far_field]
angles_deg = {{ start = 0, stop = 360, count = 721 }}
[solver]
tolerance = 1e-10
[near_field]
x_m = [-0.3, 0.3]
y_m = [-0.3, 0.3]
count = [61, 61]
"""
out = {}
for field in ("tm", "te"):
    case = parse_case(tomllib.loads(CASE.format(field=field)))
    res = solve_problem(case.problem).frequencies[0]
    out[f"{field}_far"] = res.farfield
    out[f"{field}_near"] = res.near_field.grid.scattered
if len(sys.argv) != 3 or sys.argv[1] not in ("save", "compare"):
    raise SystemExit("usage: compare_fields.py save|compare FILE.npz")
mode, path = sys.argv[1], sys.argv[2]
if mode == "save":
    np.savez(path, **out)
else:
    ref = np.load(path)
    for key, val in out.items():
        r = ref[key]
        ok = np.isfinite(r)
        diff = np.abs(val[ok] - r[ok]).max() / np.abs(r[ok]).max()
        print(f"{key}: max |after - before| / max |before| = {diff:.2e}  ({ok.sum()} values)")
