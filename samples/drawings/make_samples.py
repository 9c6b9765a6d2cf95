"""Write the sample drawings of this folder (invented objects, sizes in mm).

ribbed_mast.dxf
    A round mast section, 60 mm across, with eight radial ribs (5 mm high,
    6 mm wide, round tips), built from one block inserted eight times at
    45-degree steps; each block holds a bulged polyline (the rib) and an arc
    (the mast wall up to the next rib). A stadium-shaped cable duct (16 x 8 mm,
    a closed bulged polyline) and a 4 mm bolt hole are cut out. A label on
    layer NOTES is not outline and is reported as skipped.
strut.svg
    A streamlined strut, 90 mm chord and 20 mm thick (round leading edge,
    cubic-Bezier flanks), turned by a group transform, with an elliptical
    lightening hole placed by a nested group transform.

Run ``python make_samples.py`` to rewrite both files beside this script.
"""

from __future__ import annotations

import math
from pathlib import Path

import ezdxf

HERE = Path(__file__).resolve().parent

MAST_RADIUS_MM = 30.0
RIB_HEIGHT_MM = 5.0
RIB_WIDTH_MM = 6.0
RIBS = 8


def write_ribbed_mast(path: Path) -> Path:
    doc = ezdxf.new("R2018", units=4)  # $INSUNITS 4: millimetres
    doc.layers.add("MAST", color=5)
    doc.layers.add("NOTES", color=2)
    r, h, half_w = MAST_RADIUS_MM, RIB_HEIGHT_MM, RIB_WIDTH_MM / 2
    foot = math.sqrt(r * r - half_w * half_w)  # where the rib meets the wall
    step = 360.0 / RIBS
    rib = doc.blocks.new("RIB")
    # rib: straight flank, half-circle tip (bulge 1), straight flank
    rib.add_lwpolyline(
        [(foot, -half_w, 0.0), (r + h - half_w, -half_w, 1.0), (r + h - half_w, half_w, 0.0),
         (foot, half_w, 0.0)],
        format="xyb",
        dxfattribs={"layer": "0"},
    )
    wall = math.degrees(math.atan2(half_w, foot))
    rib.add_arc((0, 0), r, wall, step - wall, dxfattribs={"layer": "0"})
    msp = doc.modelspace()
    for k in range(RIBS):
        msp.add_blockref("RIB", (0, 0), dxfattribs={"rotation": k * step, "layer": "MAST"})
    # cable duct: 16 x 8 mm stadium below the centre
    msp.add_lwpolyline([(-4, -14, 0), (4, -14, 1), (4, -6, 0), (-4, -6, 1)], format="xyb",
                       close=True, dxfattribs={"layer": "MAST"})
    msp.add_circle((0, 12), 2.0, dxfattribs={"layer": "MAST"})
    msp.add_text("ribbed mast, mm", dxfattribs={"layer": "NOTES", "height": 3}).set_placement(
        (-20, -45))
    doc.saveas(path)
    return path


STRUT_SVG = """<?xml version="1.0" encoding="UTF-8"?>
<svg xmlns="http://www.w3.org/2000/svg" width="110mm" height="40mm" viewBox="0 0 110 40">
  <title>streamlined strut, 90 mm chord</title>
  <g id="strut" transform="translate(14 20) rotate(-4)">
    <path id="profile"
          d="M 0 -10 A 10 10 0 0 0 0 10 C 30 10 60 6 80 0 C 60 -6 30 -10 0 -10 Z"/>
    <g transform="translate(30 0)">
      <g transform="rotate(3) scale(1.5 1)">
        <ellipse id="lightening-hole" cx="0" cy="0" rx="8" ry="4"/>
      </g>
    </g>
  </g>
  <text x="5" y="38" font-size="3">strut (mm)</text>
</svg>
"""


def write_strut(path: Path) -> Path:
    path.write_text(STRUT_SVG, encoding="utf-8")
    return path


def main() -> None:
    for p in (write_ribbed_mast(HERE / "ribbed_mast.dxf"), write_strut(HERE / "strut.svg")):
        print(f"wrote {p}")


if __name__ == "__main__":
    main()
