"""Run the sample case and say where its results are (used by `make demo`)."""

from __future__ import annotations

import sys
from pathlib import Path

from sectionwave.engine.cli import main

HERE = Path(__file__).resolve().parent
OUT = HERE.parent / "demo-output"

if __name__ == "__main__":
    code = main(["run", str(HERE / "signal_mast.toml"), "--out", str(OUT), "--force"])
    if code == 0:
        print(f"demo results: {OUT}/ (summary.json, farfield.csv, monostatic.csv, surface.csv,")
        print("  echo_width_polar.png, mesh.png; open boundary.pvd in ParaView)")
    sys.exit(code)
