"""Run every benchmark in turn (quick settings); each prints its own ratios."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
RUNS = [
    ["bench_solver.py", "--quick"],
    ["bench_nearfield.py"],
    ["bench_import.py"],
    ["bench_penetrable.py", "--items", "1,2", "--max-ka", "50"],
    ["bench_startup.py"],
    ["bench_sweep.py", "--quick", "--items", "1,2"],
    ["bench_mesh_guess.py", "--quick"],
    ["bench_fast.py", "--quick", "--items", "1,2,5"],
]

if __name__ == "__main__":
    code = 0
    for args in RUNS:
        print(f"== {' '.join(args)}", flush=True)
        code |= subprocess.call([sys.executable, str(HERE / args[0]), *args[1:]])
    sys.exit(code)
