"""Look at a drawing before solving: what it holds, what cleaning made of it.

Report schema (``"schema": "sectionwave.inspect/1"``), every length in
metres, every area in square metres::

    {
      "schema": "sectionwave.inspect/1",
      "path": str, "format": str, "units": str, "scale_to_m": float,
      "layers": [{"name": str, "is_on": bool, "is_frozen": bool, "pieces": int}],
      "entities": {"read": {TYPE: int}, "skipped": {TYPE: int}},
      "pieces": int,
      "bounding_box_m": [xmin, ymin, xmax, ymax],
      "gap_tol_m": float,
      "bodies": [{
          "name": str, "layer": str, "kind": "body" | "island" | "inclusion",
          "parent": int | None, "area_m2": float, "perimeter_m": float,
          "bounding_box_m": [xmin, ymin, xmax, ymax], "segments": int,
          "segment_kinds": {KIND: int}, "smallest_feature_m": float,
          "holes": [{"area_m2": float, "perimeter_m": float,
                     "bounding_box_m": [...], "segments": int}]
      }],
      "smallest_feature_m": float | None,
      "left_out": [str],
      "audit": {"notes": [str],
                "fixes": [{"code", "message", "location", "layer", "handles"}],
                "errors": [same]},
      "is_ok": bool
    }

``smallest_feature_m`` is the least of the shortest segment, the smallest
radius of curvature of an arc and the narrowest distance between two
different contours: the length the mesh must resolve.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .clean import CleanResult, clean_drawing
from .curves import Body, Contour, EllipticalArc
from .drawing import Drawing
from .registry import read_drawing

__all__ = [
    "INSPECT_SCHEMA",
    "format_inspection",
    "inspect_drawing",
    "inspection_report",
    "write_preview_png",
]

#: Version tag of the report's layout.
INSPECT_SCHEMA = "sectionwave.inspect/1"


def _contour_feature(c: Contour) -> float:
    best = float("inf")
    for seg in c.segments:
        best = min(best, seg.length())
        if isinstance(seg, EllipticalArc):
            s = np.linalg.svd(seg.axes, compute_uv=False)
            best = min(best, float(s[1] ** 2 / s[0]))  # least radius of curvature b^2/a
    return best


def _contour_dict(c: Contour) -> dict[str, Any]:
    return {
        "area_m2": abs(c.signed_area()),
        "perimeter_m": c.perimeter(),
        "bounding_box_m": list(c.bounding_box()),
        "segments": len(c.segments),
    }


def _min_distance(contours: Sequence[Contour]) -> float:
    if len(contours) < 2:
        return float("inf")
    from shapely.geometry import LinearRing
    from shapely.strtree import STRtree

    rings = [LinearRing(c.sample(64)) for c in contours]
    tree = STRtree(rings)
    _, dist = tree.query_nearest(rings, exclusive=True, return_distance=True)
    return float(np.min(dist)) if len(dist) else float("inf")


def inspection_report(drawing: Drawing, result: CleanResult) -> dict[str, Any]:
    """Build the report of :func:`inspect_drawing` for a drawing already read and cleaned."""
    bodies = []
    all_contours: list[Contour] = []
    features = []
    for k, b in enumerate(result.bodies):
        feat = min(_contour_feature(c) for c in b.contours)
        features.append(feat)
        all_contours.extend(b.contours)
        kinds = Counter(s.kind for c in b.contours for s in c.segments)
        entry = {
            "name": b.name,
            "layer": result.layers[k],
            "kind": result.kinds[k],
            "parent": result.parents[k],
            "area_m2": b.area(),
            "perimeter_m": b.perimeter(),
            "bounding_box_m": list(b.outer.bounding_box()),
            "segments": sum(len(c.segments) for c in b.contours),
            "segment_kinds": dict(sorted(kinds.items())),
            "smallest_feature_m": feat,
            "holes": [_contour_dict(h) for h in b.holes],
        }
        bodies.append(entry)
    smallest = min([*features, _min_distance(all_contours)], default=float("inf"))
    per_layer = Counter(pc.layer for pc in drawing.pieces)
    layers = [
        {"name": name, "is_on": info.is_on, "is_frozen": info.is_frozen,
         "pieces": per_layer.get(name, 0)}
        for name, info in drawing.layers.items()
    ]
    return {
        "schema": INSPECT_SCHEMA,
        "path": drawing.name,
        "format": drawing.format,
        "units": drawing.units,
        "scale_to_m": drawing.scale_to_m,
        "layers": layers,
        "entities": {"read": dict(sorted(drawing.entity_counts.items())),
                     "skipped": dict(sorted(drawing.skipped.items()))},
        "pieces": len(drawing.pieces),
        "bounding_box_m": list(drawing.bounding_box()),
        "gap_tol_m": result.gap_tol_m,
        "bodies": bodies,
        "smallest_feature_m": None if not np.isfinite(smallest) else smallest,
        "left_out": list(drawing.left_out),
        "audit": result.audit.to_dict(),
        "is_ok": result.is_ok,
    }


def inspect_drawing(
    path: str | Path,
    *,
    units: str | float | None = None,
    layers: str | Sequence[str] | None = None,
    gap_tol: float | None = None,
) -> dict[str, Any]:
    """Read and clean a drawing and report what it holds (JSON-able).

    Parameters
    ----------
    path
        DXF or SVG file (any registered format).
    units
        Drawing unit override.
    layers
        Layer names or globs to read.
    gap_tol
        Weld tolerance in metres (default: relative to the drawing size).

    Returns
    -------
    dict
        The report described in this module's docstring.

    Raises
    ------
    DrawingError
        If the file cannot be read.
    """
    drawing = read_drawing(path, units=units, layers=layers)
    result = clean_drawing(drawing, gap_tol_m=gap_tol)
    return inspection_report(drawing, result)


def _g(v: float) -> str:
    return f"{v:.6g}"


def format_inspection(report: dict[str, Any]) -> str:
    """Format the report as a few lines of text for people.

    Examples
    --------
    >>> print(format_inspection({"path": "a.dxf", "format": "dxf", "units": "mm",
    ...     "pieces": 0, "layers": [], "entities": {"read": {}, "skipped": {}},
    ...     "bodies": [], "audit": {"notes": [], "fixes": [], "errors": []},
    ...     "smallest_feature_m": None, "gap_tol_m": 1e-9}).splitlines()[0])
    a.dxf: dxf drawing in mm, 0 pieces
    """
    out = [f"{report['path']}: {report['format']} drawing in {report['units']}, "
           f"{report['pieces']} pieces"]
    if report["layers"]:
        lay = ", ".join(
            f"{x['name']} ({x['pieces']}{'' if x['is_on'] else ', off'}"
            f"{', frozen' if x['is_frozen'] else ''})" for x in report["layers"]
        )
        out.append(f"layers: {lay}")
    read = ", ".join(f"{n} {k}" for k, n in report["entities"]["read"].items())
    out.append(f"read: {read or 'nothing'}")
    if report["entities"]["skipped"]:
        out.append("skipped: " + ", ".join(
            f"{n} {k}" for k, n in report["entities"]["skipped"].items()))
    out.append(f"bodies: {len(report['bodies'])} (gap tolerance {_g(report['gap_tol_m'])} m)")
    for b in report["bodies"]:
        x0, y0, x1, y1 = b["bounding_box_m"]
        out.append(
            f"  {b['name']} [{b['kind']}, layer {b['layer']}]: area {_g(b['area_m2'])} m^2, "
            f"perimeter {_g(b['perimeter_m'])} m, {len(b['holes'])} hole(s), "
            f"{b['segments']} segments, box {_g(x1 - x0)} x {_g(y1 - y0)} m"
        )
    if report["smallest_feature_m"] is not None:
        out.append(f"smallest feature: {_g(report['smallest_feature_m'])} m")
    for line in report.get("left_out", []):
        out.append(f"left out: {line}")
    audit = report["audit"]
    for note in audit["notes"]:
        out.append(f"note: {note}")
    fixes = Counter(f["code"] for f in audit["fixes"])
    if fixes:
        out.append("fixes: " + ", ".join(f"{n} {c}" for c, n in fixes.items()))
    for e in audit["errors"]:
        out.append(f"error [{e['code']}]: {e['message']}")
    if not audit["errors"]:
        out.append("no errors")
    return "\n".join(out)


def write_preview_png(result: CleanResult, path: str | Path, *, dpi: int = 120) -> Path:
    """Draw the cleaned bodies, with arrows showing each contour's direction.

    Outer boundaries are drawn in one colour, holes in another; errors of
    the audit that have a location are marked with a red cross.

    Parameters
    ----------
    result
        Output of :func:`~sectionwave.importers.clean.clean_drawing`.
    path
        PNG file to write.
    dpi
        Resolution.

    Returns
    -------
    pathlib.Path
        The file written.
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6, 6))
    ax = fig.add_subplot()
    ax.set_aspect("equal")
    for body in result.bodies:
        _draw_body(ax, body)
    for e in result.audit.errors:
        if e.location is not None:
            ax.plot(*e.location, "x", color="red", markersize=10, mew=2)
    ax.set_xlabel("x (m)")
    ax.set_ylabel("y (m)")
    ax.set_title(f"{len(result.bodies)} bodies, {len(result.audit.errors)} errors")
    out = Path(path)
    fig.savefig(out, dpi=dpi)
    return out


def _draw_body(ax: Any, body: Body) -> None:
    outer = body.outer.sample(64)
    ax.fill(outer[:, 0], outer[:, 1], color="0.85", zorder=1)
    for h in body.holes:
        hp = h.sample(64)
        ax.fill(hp[:, 0], hp[:, 1], color="white", zorder=2)
    for c, colour in [(body.outer, "tab:blue")] + [(h, "tab:orange") for h in body.holes]:
        pts = c.sample(64)
        closed = np.vstack([pts, pts[:1]])
        ax.plot(closed[:, 0], closed[:, 1], color=colour, lw=1.2, zorder=3)
        size = 0.02 * max(np.ptp(outer[:, 0]), np.ptp(outer[:, 1]))
        step = max(1, len(c.segments) // 8)
        for seg in c.segments[::step]:
            p = seg.points(0.5)[0]
            d = seg.tangent(0.5)[0]
            ax.annotate("", xy=p + size * d, xytext=p,
                        arrowprops={"arrowstyle": "->", "color": colour}, zorder=4)
