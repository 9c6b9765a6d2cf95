"""Run the sample cases and say where their results are (used by `make demo`).

The signal mast (inline shapes, radar), the buoy strut (SVG drawing,
sonar) and the mast in its glass-fibre fairing (a penetrable body holding
an impenetrable one) run in well under a minute together; the ribbed mast drawn in DXF
(`samples/ribbed_mast_dxf.toml`, many sharp ribs) takes longer and
is left to run by hand (about a minute): `sectionwave run samples/ribbed_mast_dxf.toml`.
"""

from __future__ import annotations

import sys
from pathlib import Path

from sectionwave.engine.cli import main

HERE = Path(__file__).resolve().parent
OUT = HERE.parent / "demo-output"
CASES = ("signal_mast", "strut_svg", "fairing_mast")

if __name__ == "__main__":
    for name in CASES:
        code = main(["run", str(HERE / f"{name}.toml"), "--out", str(OUT / name), "--force"])
        if code != 0:
            sys.exit(code)
    print(f"demo results in {OUT}/: per case summary.json, farfield.csv, monostatic.csv,")
    print("  surface.csv, nearfield.csv, PNG plots; open boundary.pvd or nearfield.pvd in ParaView")
