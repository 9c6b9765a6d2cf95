"""Write drawings with programs and libraries other than sectionwave's own readers.

Each drawing is made from coordinates given here; its expected area,
perimeter (holes included), hole count and body count are computed by
shapely from those same coordinates (curves sampled at 65 536 points per
turn), never by sectionwave. Beside each file ``NAME.json`` records the
writer, its version, the command, the reader options, the expected values
and the tolerance with its reason (how the writer approximates curves).

Writers: matplotlib (SVG backend), drawsvg, PyX, cairo through cairocffi,
dxfwrite (DXF R12) and Inkscape 1.2 (plain SVG and both DXF exports). Run::

    .venv/bin/pip install matplotlib drawsvg pyx cairocffi dxfwrite
    apt-get install inkscape python3-lxml python3-numpy python3-cssselect python3-tinycss2
    .venv/bin/python tests/data/foreign/make_foreign.py [WRITER ...]

A writer that is not installed is skipped with a message; files already
here are kept.
"""

from __future__ import annotations

import json
import math
import shutil
import subprocess
import sys
from collections.abc import Callable, Sequence
from importlib import metadata
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent

#: Points per full turn when sampling circles for the shapely reference.
TURN = 65536

MM = 1e-3
PT = 0.0254 / 72.0

Ring = list[tuple[float, float]]


# ----------------------------------------------------------------- reference geometry


def circle(cx: float, cy: float, r: float, n: int = TURN) -> Ring:
    return [(cx + r * math.cos(2 * math.pi * k / n), cy + r * math.sin(2 * math.pi * k / n))
            for k in range(n)]


def ellipse(cx: float, cy: float, a: float, b: float, n: int = TURN) -> Ring:
    return [(cx + a * math.cos(2 * math.pi * k / n), cy + b * math.sin(2 * math.pi * k / n))
            for k in range(n)]


def rect(x: float, y: float, w: float, h: float) -> Ring:
    return [(x, y), (x + w, y), (x + w, y + h), (x, y + h)]


def stadium(x0: float, x1: float, yc: float, r: float, n: int = TURN) -> Ring:
    """Two half circles of radius r around (x0, yc) and (x1, yc), joined by lines."""
    half = n // 2
    right = [(x1 + r * math.sin(math.pi * k / half), yc - r * math.cos(math.pi * k / half))
             for k in range(half + 1)]
    left = [(x0 - r * math.sin(math.pi * k / half), yc + r * math.cos(math.pi * k / half))
            for k in range(half + 1)]
    return right + left


def expected(bodies: Sequence[tuple[Ring, Sequence[Ring]]], scale_m: float) -> dict[str, Any]:
    """Area, perimeter, holes and bodies by shapely, in metres."""
    from shapely.geometry import MultiPolygon, Polygon

    polys = [Polygon(outer, list(holes)) for outer, holes in bodies]
    mp = MultiPolygon(polys)
    assert mp.is_valid, "reference geometry must be valid"
    return {
        "area_m2": mp.area * scale_m**2,
        "perimeter_m": mp.length * scale_m,
        "holes": sum(len(p.interiors) for p in polys),
        "bodies": len(polys),
        "computed_by": f"shapely {metadata.version('shapely')} from the generating "
                       f"coordinates (curves sampled at {TURN} points per turn)",
    }


def record(name: str, writer: str, version: str, command: str, options: dict[str, Any],
           ref: dict[str, Any], rel_tol: float, tol_reason: str) -> None:
    (HERE / f"{name}.json").write_text(json.dumps({
        "file": name, "writer": writer, "version": version, "command": command,
        "reader_options": options, "expected": ref, "rel_tol": rel_tol,
        "tol_reason": tol_reason,
    }, indent=1) + "\n")


# ----------------------------------------------------------------- writers


def write_matplotlib() -> None:
    import matplotlib

    matplotlib.use("svg")
    import matplotlib.pyplot as plt
    from matplotlib.patches import Circle, PathPatch, Rectangle
    from matplotlib.path import Path as MPath

    # One data unit is one point: the axes fill a 3 x 1.5 in figure and the
    # SVG backend writes 72 units per inch.
    plt.rcParams.update({"svg.fonttype": "none", "path.simplify": False,
                         "svg.hashsalt": "sectionwave"})

    def figure() -> Any:
        fig = plt.figure(figsize=(3, 1.5))
        ax = fig.add_axes((0, 0, 1, 1))
        ax.set_xlim(0, 216)
        ax.set_ylim(0, 108)
        ax.axis("off")
        return fig, ax

    fig, ax = figure()
    ax.add_patch(Rectangle((10, 10), 40, 30, facecolor="k", edgecolor="none"))
    ax.add_patch(Circle((90, 54), 30, facecolor="0.4", edgecolor="none"))
    outer, hole = rect(140, 20, 60, 70), rect(155, 35, 30, 20)
    verts = [*outer, outer[0], *hole[::-1], hole[0]]
    codes = ([MPath.MOVETO] + [MPath.LINETO] * 3 + [MPath.CLOSEPOLY]) * 2
    ax.add_patch(PathPatch(MPath(verts, codes), facecolor="C0", edgecolor="k"))
    fig.savefig(HERE / "matplotlib_patches.svg", metadata={"Date": None})
    plt.close(fig)
    ref = expected([(rect(10, 10, 40, 30), []), (circle(90, 54, 30), []), (outer, [hole])], PT)
    record("matplotlib_patches.svg", "matplotlib (SVG backend)", metadata.version("matplotlib"),
           "Rectangle, Circle and a PathPatch with a hole on axes filling the figure, "
           "fig.savefig('matplotlib_patches.svg') (see write_matplotlib)", {}, ref, 1e-6,
           "matplotlib draws a circle as 8 cubic Bezier curves (area error ~1e-6) and "
           "writes 6 decimals; the white figure background must be left out")

    fig, ax = figure()
    xs = [20, 120, 120, 70, 70, 20, 20]
    ys = [10, 10, 40, 40, 90, 90, 10]
    ax.plot(xs, ys, color="k", linewidth=0.5)
    fig.savefig(HERE / "matplotlib_outline.svg", metadata={"Date": None})
    plt.close(fig)
    ref = expected([(list(zip(xs[:-1], ys[:-1], strict=True)), [])], PT)
    record("matplotlib_outline.svg", "matplotlib (SVG backend)", metadata.version("matplotlib"),
           "ax.plot of a closed L-shaped outline, no fill (see write_matplotlib)", {}, ref,
           1e-9, "straight lines only; the white figure background must be left out and "
           "the unfilled outline read")


def write_drawsvg() -> None:
    import drawsvg as dw

    d = dw.Drawing("120mm", "80mm", viewBox="0 0 120 80")
    d.append(dw.Rectangle(10, 10, 30, 20, fill="black"))
    p = dw.Path(fill="gray", fill_rule="evenodd")
    p.M(60, 10).L(110, 10).L(110, 70).L(60, 70).Z()
    p.M(75, 40).A(10, 10, 0, 0, 1, 95, 40).A(10, 10, 0, 0, 1, 75, 40).Z()
    d.append(p)
    d.append(dw.Ellipse(25, 55, 12, 8, fill="red"))
    d.save_svg(str(HERE / "drawsvg_shapes.svg"))
    # y down in the file: mirror the reference (areas and lengths do not change)
    ref = expected([(rect(10, 10, 30, 20), []), (rect(60, 10, 50, 60), [circle(85, 40, 10)]),
                    (ellipse(25, 55, 12, 8), [])], MM)
    record("drawsvg_shapes.svg", "drawsvg", metadata.version("drawsvg"),
           "Rectangle, a Path with an evenodd arc hole, Ellipse; Drawing.save_svg "
           "(see write_drawsvg)", {}, ref, 1e-8, "exact shapes and arcs")


def write_pyx() -> None:
    import pyx

    c = pyx.canvas.canvas()
    c.fill(pyx.path.rect(0, 0, 3, 2))  # PyX lengths are in cm
    c.fill(pyx.path.path(pyx.path.moveto(4, 0), pyx.path.lineto(7, 0), pyx.path.lineto(7, 1),
                         pyx.path.lineto(5, 1), pyx.path.lineto(5, 3), pyx.path.lineto(4, 3),
                         pyx.path.closepath()))
    c.writeSVGfile(str(HERE / "pyx_polygons"))
    ref = expected([(rect(0, 0, 3, 2), []),
                    ([(4, 0), (7, 0), (7, 1), (5, 1), (5, 3), (4, 3)], [])], 1e-2)
    record("pyx_polygons.svg", "PyX", metadata.version("pyx"),
           "canvas.fill(path.rect(0, 0, 3, 2)) and an L-shaped path, "
           "canvas.writeSVGfile('pyx_polygons') (see write_pyx)", {}, ref, 1e-5,
           "PyX writes 6 significant digits (in pt)")

    c = pyx.canvas.canvas()
    c.fill(pyx.path.circle(0, 0, 1))
    c.writeSVGfile(str(HERE / "pyx_circle"))
    ref = expected([(circle(0, 0, 1), [])], 1e-2)
    record("pyx_circle.svg", "PyX", metadata.version("pyx"),
           "canvas.fill(path.circle(0, 0, 1)), canvas.writeSVGfile('pyx_circle')", {}, ref,
           2e-3, "PyX writes a full circle as two half-circle arcs whose ends sit 0.05 pt "
           "apart, joined by short lines: the path as written encloses 0.11% more than "
           "the circle (2 r 0.0494 pt over pi r^2)")


def write_cairo() -> None:
    import cairocffi as cairo

    surface = cairo.SVGSurface(str(HERE / "cairo_plate.svg"), 200, 100)
    surface.set_document_unit(cairo.SVG_UNIT_MM)
    ctx = cairo.Context(surface)
    ctx.set_tolerance(1e-4)
    ctx.set_fill_rule(cairo.FILL_RULE_EVEN_ODD)
    ctx.rectangle(10, 10, 80, 50)
    ctx.new_sub_path()
    ctx.arc(50, 35, 10, 0, 2 * math.pi)
    ctx.fill()
    ctx.arc(150, 50, 30, 0, 2 * math.pi)
    ctx.fill()
    surface.finish()
    ref = expected([(rect(10, 10, 80, 50), [circle(50, 35, 10)]), (circle(150, 50, 30), [])], MM)
    record("cairo_plate.svg", "cairo (through cairocffi)",
           f"cairo {cairo.cairo_version_string()}, cairocffi {metadata.version('cairocffi')}",
           "ctx.rectangle + ctx.arc sub-path filled even-odd, ctx.arc filled, "
           "SVGSurface in mm, tolerance 1e-4 (see write_cairo)", {}, ref, 5e-5,
           "cairo draws arcs as cubic Bezier curves within its tolerance and leaves "
           "the filled sub-paths without a closing Z")


def write_dxfwrite() -> None:
    from dxfwrite import DXFEngine as dxf

    d = dxf.drawing(str(HERE / "dxfwrite_r12.dxf"))
    d.header["$INSUNITS"] = 4
    pl = dxf.polyline(flags=1)
    pl.add_vertices([(0, 0), (40, 0), (40, 20), (0, 20)])
    d.add(pl)
    d.add(dxf.circle(5, (20, 10)))
    d.add(dxf.line((60, 0), (80, 0)))
    d.add(dxf.arc(5, (80, 5), -90, 90))
    d.add(dxf.line((80, 10), (60, 10)))
    d.add(dxf.arc(5, (60, 5), 90, 270))
    p2 = dxf.polyline(flags=1)
    p2.add_vertex((0, 40), bulge=0)
    p2.add_vertex((30, 40), bulge=1)
    p2.add_vertex((30, 50), bulge=0)
    p2.add_vertex((0, 50), bulge=1)
    d.add(p2)
    d.save()
    ref = expected([(rect(0, 0, 40, 20), [circle(20, 10, 5)]), (stadium(60, 80, 5, 5), []),
                    (stadium(0, 30, 45, 5), [])], MM)
    record("dxfwrite_r12.dxf", "dxfwrite", metadata.version("dxfwrite"),
           "POLYLINE, CIRCLE, LINE + ARC slot, POLYLINE with bulges; "
           "drawing.save() (see write_dxfwrite)", {}, ref, 1e-8,
           "exact arcs and bulges")


INKSCAPE_SOURCE = """<svg xmlns="http://www.w3.org/2000/svg"
  xmlns:inkscape="http://www.inkscape.org/namespaces/inkscape"
  width="100mm" height="60mm" viewBox="0 0 100 60">
  <g inkscape:groupmode="layer" inkscape:label="Plate">
    <path d="M10 10 H70 V50 H10 Z M25 30 A8 8 0 0 1 41 30 A8 8 0 0 1 25 30 Z"
          fill="#444" fill-rule="evenodd"/>
    <circle cx="85" cy="30" r="10" fill="#444"/>
    <ellipse cx="55" cy="30" rx="6" ry="12" fill="#fff"/>
  </g>
</svg>
"""


def write_inkscape() -> None:
    exe = shutil.which("inkscape")
    if exe is None:
        raise ImportError("inkscape is not installed")
    version = subprocess.run([exe, "--version"], capture_output=True, text=True,
                             timeout=120).stdout.split("(")[0].strip()
    src = HERE / "inkscape_source.svg"
    src.write_text(INKSCAPE_SOURCE)
    ref = expected([(rect(10, 10, 60, 40), [circle(33, 30, 8), ellipse(55, 30, 6, 12)]),
                    (circle(85, 30, 10), [])], MM)

    def run(args: list[str]) -> str:
        subprocess.run([exe, *args], check=True, capture_output=True, timeout=300, cwd=HERE)
        return "inkscape " + " ".join(args)

    cmd = run(["--actions=select-all:all;object-to-path;export-filename:inkscape_plain.svg;"
               "export-plain-svg;export-do", "inkscape_source.svg"])
    record("inkscape_plain.svg", "Inkscape", version, cmd, {}, ref, 1e-8,
           "objects converted to paths with exact elliptical arcs; the white ellipse is "
           "a filled shape inside the plate, so it is a hole")
    cmd = run(["--export-extension=org.ekips.output.dxf_outlines",
               "--export-filename=inkscape_r14.dxf", "inkscape_source.svg"])
    record("inkscape_r14.dxf", "Inkscape", version, cmd, {}, ref, 3e-5,
           "the DXF R14 export writes every arc as cubic Bezier SPLINE entities")
    cmd = run(["--export-extension=org.inkscape.output.dxf_twelve",
               "--export-filename=inkscape_r12.dxf", "inkscape_plain.svg"])
    record("inkscape_r12.dxf", "Inkscape", version, cmd, {"units": "mm"}, ref, 3e-3,
           "the DXF R12 export flattens every curve into a few straight LINEs and "
           "writes no $INSUNITS (units given to the reader)")


WRITERS: dict[str, Callable[[], None]] = {
    "matplotlib": write_matplotlib,
    "drawsvg": write_drawsvg,
    "pyx": write_pyx,
    "cairo": write_cairo,
    "dxfwrite": write_dxfwrite,
    "inkscape": write_inkscape,
}


def main(argv: Sequence[str]) -> int:
    """Run the writers named in ``argv`` (all by default)."""
    for name in argv or list(WRITERS):
        try:
            WRITERS[name]()
        except ImportError as exc:
            print(f"{name}: skipped ({exc})", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
