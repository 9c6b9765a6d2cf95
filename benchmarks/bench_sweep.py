"""Sweep throughput on a local dask cluster, and the cost of streaming and of the cluster path.

1. Throughput: the same sweep (a PEC circle, TM, one plane wave, ``--count``
   frequencies from ``--fmin`` to ``--fmax``) solved by a local cluster of
   one worker and of two workers (each one thread: BLAS, OpenMP, numba),
   frequencies per second after every worker has solved one warm-up
   frequency (so neither compiling nor loading the kernel cache is timed).
   The ratio 2 workers / 1 worker is the figure; the goal is 1.7 on two cores.
   Both sweeps run in this one invocation, on this machine.
2. Overhead on a one-frequency case: ``sectionwave run`` in-process (streamed
   to the sweep folder, the default) against the same solve by
   ``solve_problem`` and ``write_run`` without streaming, and the cluster path
   (a one-worker local cluster, start-up included) against the in-process run.
3. Adaptive against uniform sampling: a dielectric circle (eps_r = 10, ka
   from 0.5 to ``--ka-max``, TM, echo width at 0, 60, 120 and 180 deg) has
   several resonances. The adaptive sweep (``adaptive_db = 0.1``) is run
   with the solver and its fitted curve compared, at 1000 frequencies, with
   the circle's series (tests/reference.py; Balanis ch. 11). Uniform
   sampling is judged on the same 1000 frequencies: the smallest number of
   equally spaced frequencies whose straight-line interpolation of the echo
   width in dB (what a plot of a uniform sweep shows) stays within 0.1 dB,
   and the smallest whose rational fit (the same fit the adaptive sweep
   uses) does. The uniform counts use series values in place of solves
   (the solver agrees with the series to about 1e-8). dB errors are counted
   where the echo width is within 40 dB of its peak at that angle.

Run: ``python benchmarks/bench_sweep.py [--quick] [--items 1,2,3] [--radius 0.2] [--count 8] [--repeats 2]``
"""

from __future__ import annotations

import argparse
import os
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np

CASE = """title = "sweep benchmark"
[wave]
field = "tm"
frequency_hz = {freqs}
[[body]]
name = "post"
shape = {{ kind = "circle", radius_m = {radius} }}
boundary = "pec"
[[incident]]
kind = "plane"
from_deg = [0, 45, 90]
[far_field]
angles_deg = {{ start = 0, stop = 360, count = 361 }}
[output]
plots = false
vtk = false
"""


def _case(folder: Path, freqs: list[float], radius: float) -> Path:
    path = folder / "case.toml"
    path.write_text(CASE.format(freqs=[float(f) for f in freqs], radius=radius))
    return path


def throughput(workers: int, freqs: list[float], radius: float, folder: Path) -> tuple[float, int]:
    """Frequencies per second on a local cluster of ``workers`` (after a warm-up per worker)."""
    from sectionwave.engine import load_case
    from sectionwave.engine.cluster import open_executor
    from sectionwave.engine.sweep import StopRequest, solve_sweep

    problem = load_case(_case(folder, freqs, radius)).problem
    with open_executor(workers=workers) as ex:
        warm = [freqs[0] * (1 + 1e-6 * (n + 1)) for n in range(workers)]
        solve_sweep(problem, warm, executor=ex, stop=StopRequest())
        t0 = time.perf_counter()
        out = solve_sweep(problem, freqs, executor=ex, stop=StopRequest())
        elapsed = time.perf_counter() - t0
    unknowns = max(s.unknowns for s in out.solutions.values())
    return len(freqs) / elapsed, unknowns


def _best(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def overhead(folder: Path, radius: float, freq: float, repeats: int) -> dict[str, float]:
    """Seconds for one frequency: plain solve and write, streamed run, one-worker cluster run."""
    from sectionwave.engine import load_case, solve_problem, write_run
    from sectionwave.engine.cli import main

    case = _case(folder, [freq], radius)
    loaded = load_case(case)
    out = folder / "out"

    def plain() -> None:
        write_run(solve_problem(loaded.problem), out, loaded.output, force=True)

    def streamed() -> None:
        assert main(["run", str(case), "--out", str(out), "--force", "--quiet"]) == 0

    def cluster() -> None:
        assert main(["run", str(case), "--out", str(out), "--force", "--quiet", "--workers", "1"]) == 0

    plain()  # compile or load the kernels once
    return {"plain": _best(plain, repeats), "streamed": _best(streamed, repeats), "cluster": _best(cluster, repeats)}


def _rod_series(freqs: np.ndarray, radius: float, angles: np.ndarray) -> np.ndarray:
    import math
    import sys

    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from sectionwave.engine.problem import SPEED_OF_LIGHT_M_S

    from tests.reference import coefficients_far_field, layered_circle_coefficients

    out = []
    for f in freqs:
        ka = 2 * math.pi * f / SPEED_OF_LIGHT_M_S * radius
        n, c, _ = layered_circle_coefficients(ka, 1.0, [(1.0, ka * math.sqrt(10.0), 1.0)], "medium", 40)
        out.append(coefficients_far_field(n, c, ka, angles, 0.0) * math.sqrt(radius))
    return np.array(out)


def _db_error(a: np.ndarray, ref: np.ndarray) -> float:
    db_a = 20 * np.log10(np.abs(a))
    db_r = 20 * np.log10(np.abs(ref))
    shown = db_r >= np.max(db_r, axis=0) - 40.0
    return float(np.max(np.abs(db_a - db_r)[shown]))


def adaptive_against_uniform(folder: Path, ka_max: float) -> None:
    """Item 3: solves of the adaptive sweep against uniform sampling, on a resonant dielectric circle."""
    import json

    from sectionwave.engine.adaptive_frequency import FarFieldFit
    from sectionwave.engine.cli import main as cli
    from sectionwave.engine.export import read_csv

    radius = 0.0477464829  # ka = 1 at 1 GHz
    angles = np.array([0.0, 60.0, 120.0, 180.0])
    fmin, fmax = 0.5e9, ka_max * 1e9
    case = folder / "rod.toml"
    case.write_text(
        "[wave]\nfield = \"tm\"\n"
        f"frequency_hz = {{ start = {fmin}, stop = {fmax}, adaptive_db = 0.1, fit_points = 1000 }}\n"
        f"[[body]]\nname = \"rod\"\nshape = {{ kind = \"circle\", radius_m = {radius} }}\n"
        "boundary = \"penetrable\"\neps_r = 10.0\n[[incident]]\nkind = \"plane\"\nfrom_deg = 0\n"
        f"[far_field]\nangles_deg = {[float(a) for a in angles]}\n[output]\nplots = false\nvtk = false\n"
    )
    out = folder / "rod-out"
    t0 = time.perf_counter()
    assert cli(["run", str(case), "--out", str(out), "--quiet", "--force"]) == 0
    elapsed = time.perf_counter() - t0
    summary = json.loads((out / "summary.json").read_text())
    solves = summary["sweep"]["adaptive"]["solves"]
    table = read_csv(out / "fitted_sweep.csv")
    dense = np.unique(table["frequency_hz"])
    fitted = (table["farfield_re"] + 1j * table["farfield_im"]).reshape(dense.size, angles.size)
    reference = _rod_series(dense, radius, angles)
    print(f"3. dielectric circle eps_r = 10, ka 0.5-{ka_max:g}: "
          f"{len(summary['sweep']['adaptive']['resonances'])} resonances found")
    print(f"   adaptive: {solves} solves in {elapsed:.1f} s, fitted echo width within "
          f"{_db_error(fitted, reference):.3f} dB of the series at 1000 frequencies")
    db_ref = 20 * np.log10(np.abs(reference))
    shown = db_ref >= np.max(db_ref, axis=0) - 40.0
    scale = 0.5 * (fmax - fmin)

    def straight_lines_ok(n: int) -> bool:
        xs = np.linspace(fmin, fmax, n)
        db_s = 20 * np.log10(np.abs(_rod_series(xs, radius, angles)))
        interp = np.column_stack([np.interp(dense, xs, db_s[:, a]) for a in range(angles.size)])
        return bool(np.max(np.abs(interp - db_ref)[shown]) < 0.1)

    fit = None
    for n in range(5, 201):
        xs = np.linspace(fmin, fmax, n)
        model = FarFieldFit((xs - fmin) / scale - 1, _rod_series(xs, radius, angles), 1e-9)
        if _db_error(model((dense - fmin) / scale - 1), reference) < 0.1:
            fit = n
            break
    # straight lines: double until good enough, then bisect (the error falls as the spacing does)
    lo, hi = 5, 50
    while not straight_lines_ok(hi) and hi < 3200:
        lo, hi = hi, 2 * hi
    while hi - lo > max(1, hi // 50):
        mid = (lo + hi) // 2
        lo, hi = (lo, mid) if straight_lines_ok(mid) else (mid, hi)
    linear = hi if hi < 3200 else None
    print(f"   uniform, straight lines in dB: {linear} solves ({linear / solves:.1f} x the adaptive count)"
          if linear else "   uniform, straight lines in dB: more than 3200 solves")
    print(f"   uniform, the same rational fit: {fit} solves" if fit else "   uniform, the same rational fit: more than 200")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a smaller circle and fewer frequencies")
    parser.add_argument("--radius", type=float, default=0.25, help="circle radius in metres")
    parser.add_argument("--fmin", type=float, default=20e9)
    parser.add_argument("--fmax", type=float, default=24e9)
    parser.add_argument("--count", type=int, default=8)
    parser.add_argument("--repeats", type=int, default=2)
    parser.add_argument("--items", default="1,2,3", help="which items to run")
    parser.add_argument("--ka-max", type=float, default=3.0, help="top of the band of item 3 (ka)")
    args = parser.parse_args()
    items = {int(i) for i in args.items.split(",")}
    if args.quick:
        args.radius, args.count = 0.15, 6
    freqs = list(np.linspace(args.fmin, args.fmax, args.count))
    folder = Path(tempfile.mkdtemp(prefix="bench-sweep-"))
    try:
        if 3 in items:
            adaptive_against_uniform(folder, args.ka_max)
        if 1 not in items and 2 not in items:
            return
        print(f"1. throughput: PEC circle r = {args.radius} m, {args.count} frequencies "
              f"{args.fmin:.3g}-{args.fmax:.3g} Hz, 3 plane waves, 361 angles")
        rates = {}
        print(f"   load average before: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores (other work shares them)")
        for workers in (1, 2):
            rate, unknowns = throughput(workers, freqs, args.radius, folder)
            rates[workers] = rate
            print(f"   {workers} worker(s): {rate:.3f} frequencies/s (up to {unknowns} unknowns)")
        ratio = rates[2] / rates[1]
        print(f"   load average after: {os.getloadavg()[0]:.1f}")
        print(f"   2 workers / 1 worker: {ratio:.2f} x (goal 1.7: {'met' if ratio >= 1.7 else 'NOT met'})")
        t = overhead(folder, 0.1, 3e9, args.repeats)
        print("2. one frequency (PEC circle r = 0.1 m at 3 GHz), best of", args.repeats)
        print(f"   solve_problem + write_run: {t['plain']:.3f} s; streamed run: {t['streamed']:.3f} s "
              f"(+{t['streamed'] - t['plain']:.3f} s); one-worker cluster run: {t['cluster']:.3f} s "
              f"(+{t['cluster'] - t['streamed']:.3f} s, cluster start and close included)")
    finally:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
