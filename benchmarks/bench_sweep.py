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

Run: ``python benchmarks/bench_sweep.py [--quick] [--radius 0.2] [--count 8] [--repeats 2]``
"""

from __future__ import annotations

import argparse
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


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a smaller circle and fewer frequencies")
    parser.add_argument("--radius", type=float, default=0.25, help="circle radius in metres")
    parser.add_argument("--fmin", type=float, default=20e9)
    parser.add_argument("--fmax", type=float, default=24e9)
    parser.add_argument("--count", type=int, default=8)
    parser.add_argument("--repeats", type=int, default=2)
    args = parser.parse_args()
    if args.quick:
        args.radius, args.count = 0.15, 6
    freqs = list(np.linspace(args.fmin, args.fmax, args.count))
    folder = Path(tempfile.mkdtemp(prefix="bench-sweep-"))
    try:
        print(f"1. throughput: PEC circle r = {args.radius} m, {args.count} frequencies "
              f"{args.fmin:.3g}-{args.fmax:.3g} Hz, 3 plane waves, 361 angles")
        rates = {}
        for workers in (1, 2):
            rate, unknowns = throughput(workers, freqs, args.radius, folder)
            rates[workers] = rate
            print(f"   {workers} worker(s): {rate:.3f} frequencies/s (up to {unknowns} unknowns)")
        ratio = rates[2] / rates[1]
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
