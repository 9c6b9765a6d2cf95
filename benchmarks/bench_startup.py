"""Start-up cost of the command line: a tiny solve against ``sectionwave --version``.

Writes a tiny case (PEC circle of radius 0.2 m at 300 MHz, TM, one plane
wave, tolerance 1e-6: 8 panels, 128 unknowns), once with plots and VTK off
and once with the default outputs, and times as subprocesses

* ``sectionwave --version``
* ``sectionwave run CASE --out DIR --force --quiet``

using the ``sectionwave`` script beside ``sys.executable``. The compiled
kernels are cached in a fresh folder (``NUMBA_CACHE_DIR``), so the first run
is a cold-cache run; it also fills the cache, then each command is timed
``--repeats`` times and the best time is kept, both wall time and CPU time
(user + system over all threads, which moves less when other work shares
the machine). The goal is a wall-time ratio ``run / --version`` of at most 3
for the case without plots.

Run: ``python benchmarks/bench_startup.py [--repeats 3] [--keep-cache] [--blas-threads N]``
(``--keep-cache`` uses numba's usual cache folder instead of a fresh one,
so the "cold" figure is only cold the first time; ``--blas-threads 1``
sets ``OPENBLAS_NUM_THREADS`` and ``MKL_NUM_THREADS`` for the runs, to show
what the BLAS worker threads cost a problem this small).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CASE = """title = "start-up check"
[wave]
field = "tm"
frequency_hz = 3e8
[[body]]
name = "post"
shape = {{ kind = "circle", radius_m = 0.2 }}
boundary = "pec"
[[incident]]
kind = "plane"
from_deg = [0]
[far_field]
angles_deg = {{ start = 0, stop = 360, count = 73 }}
[solver]
tolerance = 1e-6
{output}"""

NO_PLOTS = "[output]\nplots = false\nvtk = false\n"


def _script() -> str:
    exe = Path(sys.executable).parent / ("sectionwave.exe" if os.name == "nt" else "sectionwave")
    if not exe.exists():
        raise SystemExit(f"no sectionwave script beside {sys.executable}; install the package first")
    return str(exe)


def _cpu() -> float:
    try:
        import resource
    except ImportError:  # not on Windows
        return float("nan")
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def _time(cmd: list[str], env: dict[str, str]) -> tuple[float, float]:
    """Wall time and CPU time (user + system, all threads) of one run."""
    c0 = _cpu()
    t0 = time.perf_counter()
    proc = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=600)
    dt = time.perf_counter() - t0
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed ({proc.returncode}):\n{proc.stderr}")
    return dt, _cpu() - c0


def _best(cmd: list[str], env: dict[str, str], repeats: int) -> tuple[float, float]:
    runs = [_time(cmd, env) for _ in range(repeats)]
    return min(r[0] for r in runs), min(r[1] for r in runs)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=3, help="timed runs per command (best kept)")
    ap.add_argument("--keep-cache", action="store_true", help="use numba's usual cache folder")
    ap.add_argument("--blas-threads", type=int, default=None, help="OPENBLAS_NUM_THREADS for the runs")
    args = ap.parse_args()
    exe = _script()
    with tempfile.TemporaryDirectory() as tmp_s:
        tmp = Path(tmp_s)
        env = dict(os.environ)
        if not args.keep_cache:
            env["NUMBA_CACHE_DIR"] = str(tmp / "numba-cache")
        if args.blas_threads is not None:
            env["OPENBLAS_NUM_THREADS"] = env["MKL_NUM_THREADS"] = str(args.blas_threads)
        cases = {
            "no plots/vtk": tmp / "tiny.toml",
            "default outputs": tmp / "tiny_default.toml",
        }
        cases["no plots/vtk"].write_text(CASE.format(output=NO_PLOTS))
        cases["default outputs"].write_text(CASE.format(output=""))
        out = str(tmp / "results")
        version = [exe, "--version"]
        runs = {name: [exe, "run", str(path), "--out", out, "--force", "--quiet"] for name, path in cases.items()}

        cold, cold_cpu = _time(runs["no plots/vtk"], env)  # fills the cache
        blas = "default" if args.blas_threads is None else str(args.blas_threads)
        print(f"python {sys.version.split()[0]}, {exe}, BLAS threads {blas}")
        print(f"{'':42s}  wall (best of {args.repeats})   CPU, all threads (best of {args.repeats})")
        print(f"first run (cold numba cache), no plots/vtk: {cold:6.2f} s{'':17s}{cold_cpu:6.2f} s")
        _time(version, env)
        best_v, cpu_v = _best(version, env, args.repeats)
        print(f"sectionwave --version                     : {best_v:6.2f} s{'':17s}{cpu_v:6.2f} s")
        for name, cmd in runs.items():
            _time(cmd, env)  # warm-up (the default case compiles nothing new, but reads other modules)
            best, cpu = _best(cmd, env, args.repeats)
            print(f"sectionwave run, {name:<25s}: {best:6.2f} s  ratio {best / best_v:4.1f}     "
                  f"{cpu:6.2f} s  ratio {cpu / cpu_v:4.1f}")

if __name__ == "__main__":
    main()
