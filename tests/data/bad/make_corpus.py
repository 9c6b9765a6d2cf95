"""Write the bad-input corpus of drawings and its manifest.

Run from anywhere: ``python tests/data/bad/make_corpus.py``. Every file in
this folder (except this script and the README) is written here, together
with ``manifest.json``: one entry per case with the expected error class,
message fragments and, for cases too large to keep in the repository
(``"made_at_test_time": true``), nothing on disk: the test calls
:func:`write_case` into a temporary folder.

Manifest entry (``schema`` ``sectionwave.bad-corpus/1``)::

    {"name": str,            # unique, also the file stem
     "kind": "drawing",      # "case" entries (case files) use the same fields
     "file": str,            # file name in this folder
     "argv": [str],          # CLI arguments; "{file}" stands for the path
     "api": {"units": ...},  # keyword arguments of read_drawing (drawing cases)
     "outcome": "refused",   # or "read": damaged but repairable, see below
     "error": str,           # expected exception class name (SectionwaveError subclass)
     "match": str,           # fragment of the message: what is wrong
     "place": str | null,    # fragment naming the place (handle, id, line, point)
     "fix": str,             # fragment saying what to do
     "made_at_test_time": bool,
     "about": str}           # one line for people

A ``"read"`` entry has ``note`` (a fragment of the repair note that
``inspect`` prints) and ``bodies`` (how many bodies result) instead of
``error``, ``match``, ``place`` and ``fix``.
"""

from __future__ import annotations

import io
import json
import os
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent

Case = dict[str, Any]
_WRITERS: dict[str, Callable[[Path], None]] = {}
CASES: list[Case] = []


def repaired(name: str, suffix: str, note: str, bodies: int, about: str,
             ) -> Callable[[Callable[[Path], None]], Callable[[Path], None]]:
    """Register a damaged file that must be read, with ``note`` saying what was repaired."""

    def deco(fn: Callable[[Path], None]) -> Callable[[Path], None]:
        _WRITERS[name] = fn
        CASES.append({
            "name": name, "kind": "drawing", "file": name + suffix,
            "argv": ["inspect", "{file}"], "api": {}, "outcome": "read",
            "note": note, "bodies": bodies, "made_at_test_time": False, "about": about,
        })
        return fn

    return deco


def case(name: str, suffix: str, error: str, match: str, fix: str, about: str, *,
         place: str | None = None, argv: list[str] | None = None,
         api: dict[str, Any] | None = None, at_test_time: bool = False,
         ) -> Callable[[Callable[[Path], None]], Callable[[Path], None]]:
    """Register a case and the function writing its file."""
    file = name + suffix

    def deco(fn: Callable[[Path], None]) -> Callable[[Path], None]:
        _WRITERS[name] = fn
        CASES.append({
            "name": name, "kind": "drawing", "file": file,
            "argv": argv or ["inspect", "{file}"], "api": api or {}, "outcome": "refused",
            "error": error, "match": match, "place": place, "fix": fix,
            "made_at_test_time": at_test_time, "about": about,
        })
        return fn

    return deco


# ------------------------------------------------------------------------ helpers


def _doc(units: int = 4) -> Any:
    import ezdxf

    return ezdxf.new("R2000", units=units)


def _dxf_text(doc: Any) -> str:
    s = io.StringIO()
    doc.write(s)
    return s.getvalue()


def _save(doc: Any, path: Path) -> None:
    path.write_text(_dxf_text(doc), newline="\n")


def _square(msp: Any, x: float, y: float, a: float) -> None:
    msp.add_lwpolyline([(x, y), (x + a, y), (x + a, y + a), (x, y + a)], close=True)


def _svg(body: str, head: str = 'width="100mm" height="100mm" viewBox="0 0 100 100"') -> str:
    return (f'<svg xmlns="http://www.w3.org/2000/svg" '
            f'xmlns:xlink="http://www.w3.org/1999/xlink" {head}>{body}</svg>\n')


# ------------------------------------------------------------------------ DXF cases


@case("dxf_truncated", ".dxf", "DrawingError", "truncated", "save or copy the drawing again",
      "a valid drawing cut in the middle of its ENTITIES section",
      place="bytes")
def _(path: Path) -> None:
    doc = _doc()
    for i in range(40):
        doc.modelspace().add_circle((3 * i, 0), 1)
    text = _dxf_text(doc)
    start = text.index("ENTITIES")
    path.write_text(text[: start + (len(text) - start) // 2], newline="\n")


@case("dxf_empty", ".dxf", "DrawingError", "empty", "save the drawing again",
      "a zero-byte file")
def _(path: Path) -> None:
    path.write_bytes(b"")


@case("dxf_binary_garbage", ".dxf", "DrawingError", "not a DXF file",
      "check the file", "random bytes with a .dxf name", place="starts with")
def _(path: Path) -> None:
    import random

    rng = random.Random(12)
    path.write_bytes(bytes(rng.randrange(256) for _ in range(3000)))


@case("dxf_is_really_svg", ".dxf", "DrawingError", "not a DXF file", "rename it to .svg",
      "an SVG drawing saved under a .dxf name (wrong suffix)", place="starts with")
def _(path: Path) -> None:
    path.write_text('<?xml version="1.0"?>\n' + _svg('<circle cx="5" cy="5" r="2"/>'))


@case("dxf_png_bytes", ".dxf", "DrawingError", "not a DXF file", "check the file",
      "a PNG image renamed to .dxf (binary where text is expected)", place="starts with")
def _(path: Path) -> None:
    path.write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(range(256)) * 4)


@case("dxf_binary_sentinel_garbage", ".dxf", "DrawingError", "cannot read the DXF file",
      "save it again", "the binary-DXF sentinel followed by garbage")
def _(path: Path) -> None:
    path.write_bytes(b"AutoCAD Binary DXF\r\n\x1a\x00" + bytes(range(256)) * 8)


@case("dxf_units_unknown", ".dxf", "DrawingError", "units unknown",
      "give units", "$INSUNITS 0 (unitless) and no units given", place="$INSUNITS")
def _(path: Path) -> None:
    doc = _doc(units=0)
    doc.modelspace().add_circle((0, 0), 1)
    _save(doc, path)


@case("dxf_only_text", ".dxf", "DrawingError", "no closed outline",
      "draw the cross-section", "text and a dimension, no outline", place="found")
def _(path: Path) -> None:
    doc = _doc()
    msp = doc.modelspace()
    msp.add_text("section A-A")
    msp.add_point((1, 1))
    _save(doc, path)


@case("dxf_missing_block", ".dxf", "DrawingError", "no closed outline",
      "draw the cross-section", "the only entity inserts a block that is not defined",
      place="INSERT(#")
def _(path: Path) -> None:
    doc = _doc()
    blk = doc.blocks.new("GONE")
    blk.add_circle((0, 0), 1)
    doc.modelspace().add_blockref("GONE", (0, 0))
    text = _dxf_text(doc)
    # rename the reference so it points nowhere (ezdxf will not write that itself)
    i = text.index("INSERT", text.index("ENTITIES"))
    j = text.index("GONE", i)
    path.write_text(text[:j] + "LOST" + text[j + 4:], newline="\n")


@case("dxf_recursive_block", ".dxf", "DrawingError", "inserts itself",
      "fix the block definitions", "block A inserts B, which inserts A", place="'A'")
def _(path: Path) -> None:
    doc = _doc()
    a = doc.blocks.new("A")
    b = doc.blocks.new("B")
    a.add_circle((0, 0), 1)
    a.add_blockref("B", (5, 0))
    b.add_blockref("A", (5, 0))
    doc.modelspace().add_blockref("A", (0, 0))
    _save(doc, path)


@case("dxf_block_bomb", ".dxf", "DrawingError", "block reference bomb",
      "explode or purge the blocks",
      "ten blocks each inserting the previous one ten times: 10^10 circles",
      place="expands to")
def _(path: Path) -> None:
    doc = _doc()
    doc.blocks.new("B0").add_circle((0, 0), 1)
    for k in range(1, 11):
        blk = doc.blocks.new(f"B{k}")
        for i in range(10):
            blk.add_blockref(f"B{k - 1}", (3 * i, 0))
    doc.modelspace().add_blockref("B10", (0, 0))
    _save(doc, path)


@case("dxf_minsert_bomb", ".dxf", "DrawingError", "block reference bomb",
      "explode or purge the blocks", "one MINSERT of 100000 x 100000 copies",
      place="expands to")
def _(path: Path) -> None:
    doc = _doc()
    doc.blocks.new("C").add_circle((0, 0), 1)
    ref = doc.modelspace().add_blockref("C", (0, 0))
    ref.dxf.row_count = 100000
    ref.dxf.column_count = 100000
    ref.dxf.row_spacing = 3
    ref.dxf.column_spacing = 3
    _save(doc, path)


@case("dxf_3dface", ".dxf", "DrawingError", "3D entity refused", "flatten the drawing",
      "a 3DFACE beside a circle", place="3DFACE #")
def _(path: Path) -> None:
    doc = _doc()
    doc.modelspace().add_circle((0, 0), 1)
    doc.modelspace().add_3dface([(0, 0, 0), (1, 0, 0), (1, 1, 1)])
    _save(doc, path)


@case("dxf_true_3d_polyline", ".dxf", "DrawingError", "true 3D polyline",
      "flatten the drawing", "a closed 3D polyline whose vertices change height",
      place="POLYLINE #")
def _(path: Path) -> None:
    doc = _doc()
    doc.modelspace().add_polyline3d([(0, 0, 0), (10, 0, 5), (10, 10, 0)], close=True)
    _save(doc, path)


@case("dxf_tilted_circle", ".dxf", "DrawingError", "tilted plane", "flatten the drawing",
      "a circle whose extrusion is tilted out of the drawing plane", place="CIRCLE #")
def _(path: Path) -> None:
    doc = _doc()
    doc.modelspace().add_circle((0, 0), 1, dxfattribs={"extrusion": (0, 1, 1)})
    _save(doc, path)


@case("dxf_open_chain", ".dxf", "GeometryError", "open chain", "close the outline",
      "three sides of a square", place="loose ends at")
def _(path: Path) -> None:
    doc = _doc()
    msp = doc.modelspace()
    pts = [(0, 0), (10, 0), (10, 10), (0, 10)]
    for a, b in zip(pts[:-1], pts[1:], strict=True):
        msp.add_line(a, b)
    _save(doc, path)


@case("dxf_bow_tie", ".dxf", "GeometryError", "crosses itself", "redraw the outline",
      "a closed polyline that crosses itself (bow tie)", place="layer")
def _(path: Path) -> None:
    doc = _doc()
    doc.modelspace().add_lwpolyline([(0, 0), (10, 10), (10, 0), (0, 10)], close=True)
    _save(doc, path)


@case("dxf_overlapping_bodies", ".dxf", "GeometryError", "the bodies overlap",
      "merge or separate them",
      "two circles that overlap", place="layer")
def _(path: Path) -> None:
    doc = _doc()
    doc.modelspace().add_circle((0, 0), 5)
    doc.modelspace().add_circle((6, 0), 5)
    _save(doc, path)


@case("dxf_zero_area_ring", ".dxf", "GeometryError", "encloses no area", "remove it",
      "a closed polyline through three points on one line", place="layer")
def _(path: Path) -> None:
    doc = _doc()
    doc.modelspace().add_lwpolyline([(0, 0), (10, 0), (20, 0)], close=True)
    _save(doc, path)


@case("dxf_huge_coordinates", ".dxf", "DrawingError", "beyond the", "check the drawing's units",
      "a circle at 1e300 mm from the origin", place="CIRCLE #")
def _(path: Path) -> None:
    doc = _doc()
    doc.modelspace().add_circle((1e300, 0), 1e299)
    _save(doc, path)


@case("dxf_nan_coordinate", ".dxf", "DrawingError", "not a finite number",
      "fix or delete that entity", "a LINE whose end point is NaN", place="LINE #")
def _(path: Path) -> None:
    doc = _doc()
    msp = doc.modelspace()
    _square(msp, 0, 0, 10)
    msp.add_line((0, 0), (12345.678, 5))
    path.write_text(_dxf_text(doc).replace("12345.678", "nan"), newline="\n")


@case("dxf_infinite_radius", ".dxf", "DrawingError", "not a finite number",
      "fix or delete that entity", "a circle of radius 1e400 (infinity once read)",
      place="CIRCLE #")
def _(path: Path) -> None:
    doc = _doc()
    doc.modelspace().add_circle((0, 0), 4321.5)
    path.write_text(_dxf_text(doc).replace("4321.5", "1e400"), newline="\n")


@case("dxf_bad_spline_knots", ".dxf", "DrawingError", "not a valid spline", "redraw it",
      "a SPLINE whose knots decrease", place="SPLINE #")
def _(path: Path) -> None:
    doc = _doc()
    spl = doc.modelspace().add_open_spline([(0, 0, 0), (1, 1, 0), (2, 0, 0), (3, 1, 0)],
                                           degree=3, knots=[0, 0, 0, 0, 1, 1, 1, 1])
    spl.knots = [0, 0, 0, 0, 1, 1, 1, -7]
    _save(doc, path)


@case("dxf_all_entities_unreadable", ".dxf", "DrawingError", "no closed outline",
      "draw the cross-section", "the only outline entity lacks its subclass markers "
      "and is dropped", place="found")
def _(path: Path) -> None:
    doc = _doc()
    doc.modelspace().add_lwpolyline([(0, 0), (1, 0), (1, 1)], close=True)
    text = _dxf_text(doc)
    i = text.index("LWPOLYLINE", text.index("ENTITIES"))
    j = text.index("\n  0\n", i)
    lines = text[i:j].split("\n")
    kept = [f"{c}\n{v}" for c, v in zip(lines[1::2], lines[2::2], strict=False)
            if c.strip() != "100"]
    path.write_text(text[:i] + "LWPOLYLINE\n" + "\n".join(kept) + text[j:], newline="\n")


@case("dxf_over_size_cap", ".dxf", "DrawingError", "over the", "raise max_bytes",
      "a sparse file of 200 MiB (over the DXF size cap)", place="bytes",
      at_test_time=True)
def _(path: Path) -> None:
    with open(path, "wb") as fh:
        fh.write(b"  0\nSECTION\n  2\nENTITIES\n")
        fh.truncate(200 * 1024 * 1024)


# ------------------------------------------------------------------------ SVG cases


@case("svg_truncated", ".svg", "DrawingError", "not well-formed XML", "really an SVG",
      "an SVG cut in the middle of an element", place="line")
def _(path: Path) -> None:
    text = _svg('<g id="a"><circle cx="50" cy="50" r="20"/><path d="M0 0 L10 0 L10 10 Z"/></g>')
    path.write_text(text[: len(text) * 2 // 3])


@case("svg_empty", ".svg", "DrawingError", "empty", "save the drawing again",
      "a zero-byte file")
def _(path: Path) -> None:
    path.write_bytes(b"")


@case("svg_png_bytes", ".svg", "DrawingError", "not well-formed XML", "really an SVG",
      "a PNG image renamed to .svg (binary where text is expected)", place="line")
def _(path: Path) -> None:
    path.write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(range(256)) * 4)


@case("svg_is_really_dxf", ".svg", "DrawingError", "it holds DXF", "rename it to .dxf",
      "a DXF drawing saved under a .svg name (wrong suffix)")
def _(path: Path) -> None:
    doc = _doc()
    doc.modelspace().add_circle((0, 0), 1)
    _save(doc, path)


@case("svg_not_utf8", ".svg", "DrawingError", "not well-formed XML", "really an SVG",
      "declared UTF-8 but written in Latin-1 (a title with an accent)", place="line")
def _(path: Path) -> None:
    text = _svg('<title>coupe transversale \xe9paisse</title><circle cx="5" cy="5" r="2"/>')
    path.write_bytes(('<?xml version="1.0" encoding="UTF-8"?>\n' + text).encode("latin-1"))


@case("svg_billion_laughs", ".svg", "DrawingError", "entity declaration refused",
      "remove the <!DOCTYPE> internal subset", "nested entity expansion (billion laughs)",
      place="'lol")
def _(path: Path) -> None:
    ents = ['<!ENTITY lol "lol">'] + [
        f'<!ENTITY lol{k} "{("&lol" + (str(k - 1) if k > 1 else "") + ";") * 10}">'
        for k in range(1, 10)
    ]
    path.write_text('<?xml version="1.0"?>\n<!DOCTYPE svg [' + "".join(ents) + "]>\n"
                    + _svg("<title>&lol9;</title>"))


@case("svg_external_entity", ".svg", "DrawingError", "external entity refused",
      "remove the <!ENTITY> declaration", "an entity that would read /etc/passwd",
      place="/etc/passwd")
def _(path: Path) -> None:
    path.write_text('<?xml version="1.0"?>\n<!DOCTYPE svg [<!ENTITY x SYSTEM '
                    '"file:///etc/passwd">]>\n' + _svg("<title>&x;</title>"))


@case("svg_use_bomb", ".svg", "DrawingError", "reference bomb", "",
      "each group uses the previous one ten times: 10^12 circles", place="use")
def _(path: Path) -> None:
    defs = ['<circle id="g0" cx="1" cy="1" r="0.5"/>']
    for k in range(1, 13):
        uses = "".join(f'<use href="#g{k - 1}" x="{i}"/>' for i in range(10))
        defs.append(f'<g id="g{k}">{uses}</g>')
    path.write_text(_svg("<defs>" + "".join(defs) + '</defs><use href="#g12"/>'))


@case("svg_use_loop", ".svg", "DrawingError", "loop", "break the loop",
      "two groups that use each other", place="use")
def _(path: Path) -> None:
    path.write_text(_svg('<g id="a"><circle cx="5" cy="5" r="1"/><use href="#b"/></g>'
                         '<g id="b"><use href="#a"/></g>'))


@case("svg_deep_nesting", ".svg", "DrawingError", "nested more than", "flatten the groups",
      "a circle inside 5000 nested groups", place="depth")
def _(path: Path) -> None:
    path.write_text(_svg("<g>" * 5000 + '<circle cx="5" cy="5" r="1"/>' + "</g>" * 5000))


@case("svg_only_text", ".svg", "DrawingError", "no closed outline", "draw the cross-section",
      "text only", place="found")
def _(path: Path) -> None:
    path.write_text(_svg('<text x="10" y="10">section</text>'))


@case("svg_open_path", ".svg", "GeometryError", "open chain", "close the outline",
      "an unfilled stroked path that does not close", place="loose ends at")
def _(path: Path) -> None:
    path.write_text(_svg('<path id="edge" fill="none" stroke="black" d="M10 10 H90 V90 H10"/>'))


@case("svg_bow_tie", ".svg", "GeometryError", "crosses itself", "redraw the outline",
      "a filled polygon that crosses itself", place="layer")
def _(path: Path) -> None:
    path.write_text(_svg('<polygon id="tie" points="10,10 90,90 90,10 10,90"/>'))


@case("svg_overlapping_bodies", ".svg", "GeometryError", "the bodies overlap",
      "merge or separate them",
      "two filled discs that overlap", place="layer")
def _(path: Path) -> None:
    path.write_text(_svg('<circle id="a" cx="40" cy="50" r="20"/>'
                         '<circle id="b" cx="60" cy="50" r="20"/>'))


@case("svg_zero_area_polygon", ".svg", "GeometryError", "encloses no area", "remove it",
      "a filled polygon whose points lie on one line", place="layer")
def _(path: Path) -> None:
    path.write_text(_svg('<polygon id="flat" points="10,10 50,10 90,10"/>'))


@case("svg_huge_coordinates", ".svg", "DrawingError", "beyond the",
      "check the drawing's units", "a circle of radius 1e300 user units", place="circle")
def _(path: Path) -> None:
    path.write_text(_svg('<circle id="sun" cx="0" cy="0" r="1e300"/>'))


@case("svg_infinite_transform", ".svg", "DrawingError", "too large to be finite",
      "give finite numbers", "a scale of 1e400 (infinity once read)", place="circle id='c'")
def _(path: Path) -> None:
    path.write_text(_svg('<circle id="c" cx="5" cy="5" r="1" transform="scale(1e400)"/>'))


@case("svg_nan_length", ".svg", "DrawingError", "cannot read cx", "give a number",
      "a circle whose centre is NaN", place="circle id='c'")
def _(path: Path) -> None:
    path.write_text(_svg('<circle id="c" cx="NaN" cy="5" r="1"/>'))


@case("svg_bad_path_data", ".svg", "DrawingError", "bad path data at character",
      "correct the path data", "an unknown command letter in path data",
      place="path id='p7'")
def _(path: Path) -> None:
    path.write_text(_svg('<path id="p7" d="M0 0 L10 10 X 5 Z"/>'))


@case("svg_bad_transform", ".svg", "DrawingError", "cannot read transform",
      "expected matrix, translate", "a transform function that does not exist",
      place="g id='t'")
def _(path: Path) -> None:
    path.write_text(_svg('<g id="t" transform="twist(30)"><circle cx="5" cy="5" r="1"/></g>'))


@case("svg_bad_viewbox", ".svg", "DrawingError", "viewBox", "positive width and height",
      "a viewBox of negative width", place="<svg>",
      )
def _(path: Path) -> None:
    path.write_text(_svg('<circle cx="5" cy="5" r="1"/>',
                         head='width="100mm" height="100mm" viewBox="0 0 -100 100"'))


@case("svg_root_not_svg", ".svg", "DrawingError", "not an SVG drawing", "",
      "well-formed XHTML, not SVG", place="root element")
def _(path: Path) -> None:
    path.write_text('<html xmlns="http://www.w3.org/1999/xhtml"><body>hi</body></html>')


@case("svg_over_size_cap", ".svg", "DrawingError", "over the", "raise max_bytes",
      "a sparse file of 100 MiB (over the SVG size cap)", place="bytes", at_test_time=True)
def _(path: Path) -> None:
    with open(path, "wb") as fh:
        fh.write(b'<svg xmlns="http://www.w3.org/2000/svg">')
        fh.truncate(100 * 1024 * 1024)


# ------------------------------------------------------------------------ other


@case("unknown_format", ".pdf", "DrawingError", "unknown drawing format", "give format",
      "a PDF file (wrong suffix and content)", place="suffix")
def _(path: Path) -> None:
    path.write_bytes(b"%PDF-1.4\n%\xe2\xe3\xcf\xd3\n1 0 obj << >> endobj\n%%EOF\n")


@case("missing_file", ".dxf", "DrawingError", "no such file", "",
      "a drawing that does not exist (nothing is written for it)", at_test_time=True)
def _(path: Path) -> None:
    if path.exists():
        os.remove(path)


# ------------------------------------------------------------------------ damaged but readable


@repaired("dxf_duplicate_handles", ".dxf", "repeats handle", 2,
          "two circles sharing one handle (ezdxf alone would delete the second)")
def _(path: Path) -> None:
    doc = _doc()
    a = doc.modelspace().add_circle((0, 0), 1)
    b = doc.modelspace().add_circle((5, 0), 1)
    path.write_text(_dxf_text(doc).replace(f"  5\n{b.dxf.handle}\n", f"  5\n{a.dxf.handle}\n"),
                    newline="\n")


@repaired("dxf_lwpolyline_without_markers", ".dxf", "dropped unreadable entity LWPOLYLINE", 1,
          "a circle and an LWPOLYLINE written without subclass markers")
def _(path: Path) -> None:
    doc = _doc()
    doc.modelspace().add_circle((0, 0), 1)
    doc.modelspace().add_lwpolyline([(3, 0), (4, 0), (4, 1)], close=True)
    text = _dxf_text(doc)
    i = text.index("LWPOLYLINE", text.index("ENTITIES"))
    j = text.index("\n  0\n", i)
    lines = text[i:j].split("\n")
    kept = [f"{c}\n{v}" for c, v in zip(lines[1::2], lines[2::2], strict=False)
            if c.strip() != "100"]
    path.write_text(text[:i] + "LWPOLYLINE\n" + "\n".join(kept) + text[j:], newline="\n")


@repaired("dxf_not_utf8", ".dxf", "unicode decoding error", 1,
          "an R2018 file (UTF-8 by definition) with a Latin-1 layer name")
def _(path: Path) -> None:
    import ezdxf

    doc = ezdxf.new("R2018", units=4)
    doc.layers.add("COUPE_Epaisse")
    doc.modelspace().add_circle((0, 0), 1, dxfattribs={"layer": "COUPE_Epaisse"})
    text = _dxf_text(doc).replace("COUPE_Epaisse", "COUPE_\xe9paisse")
    path.write_bytes(text.encode("latin-1"))


@repaired("svg_filled_path_without_z", ".svg", "no closing Z", 1,
          "a filled triangle whose path data does not end in Z")
def _(path: Path) -> None:
    path.write_text(_svg('<path id="tri" d="M10 10 L90 10 L90 90"/>'))


@repaired("svg_page_background", ".svg", "page background", 1,
          "a white page-sized rectangle under a filled disc")
def _(path: Path) -> None:
    path.write_text(_svg('<rect id="paper" width="100" height="100" fill="#ffffff"/>'
                         '<circle id="rod" cx="50" cy="50" r="10" fill="gray"/>'))


# ------------------------------------------------------------------------ case files


def case_file(name: str, error: str, match: str, fix: str, about: str, *, place: str | None = None,
              argv: list[str] | None = None) -> Callable[[Callable[[], str]], Callable[[], str]]:
    """Register a bad case file; the function returns its text (written as UTF-8, or Latin-1 for ``*latin1``)."""
    file = name + ".toml"

    def deco(fn: Callable[[], str]) -> Callable[[], str]:
        def write(path: Path) -> None:
            text = fn()
            path.write_bytes(text.encode("latin-1") if name.endswith("latin1") else text.encode("utf-8"))

        _WRITERS[name] = write
        CASES.append({
            "name": name, "kind": "case", "file": file,
            "argv": argv or ["run", "{file}", "--out", "out"], "api": {}, "outcome": "refused",
            "error": error, "match": match, "place": place, "fix": fix,
            "made_at_test_time": False, "about": about,
        })
        return fn

    return deco


def _toml(wave: str = 'field = "tm"\nfrequency_hz = 3e9', body: str = 'shape = { kind = "circle", radius_m = 0.05 }',
          extra: str = "") -> str:
    return (f'title = "bad"\n[wave]\n{wave}\n[[body]]\nname = "post"\n{body}\nboundary = "pec"\n'
            f"[output]\nplots = false\n{extra}")


@case_file("case_misspelt_key", "CaseError", "is not a known key here", "did you mean 'frequency_hz'?",
           "frequency_hz misspelt: the unknown key is named with its near match", place="[wave.frequncy_hz]")
def _() -> str:
    return _toml(wave='field = "tm"\nfrequncy_hz = 3e9')


@case_file("case_frequency_is_text", "CaseError", "must be a finite number", "9.4 GHz",
           "a frequency written as a word", place="[wave.frequency_hz]")
def _() -> str:
    return _toml(wave='field = "tm"\nfrequency_hz = "fast"')


@case_file("case_frequency_nan", "CaseError", "finite numbers", "must hold finite numbers",
           "a frequency of nan", place="[wave.frequency_hz]")
def _() -> str:
    return _toml(wave='field = "tm"\nfrequency_hz = nan')


@case_file("case_negative_radius", "CaseError", "must be positive", "positive",
           "a circle of negative radius", place="[body.0.shape.radius_m]")
def _() -> str:
    return _toml(body='shape = { kind = "circle", radius_m = -0.05 }')


@case_file("case_radius_in_hertz", "CaseError", "a length with units", "25 mm",
           "a radius given in GHz", place="[body.0.shape.radius_m]")
def _() -> str:
    return _toml(body='shape = { kind = "circle", radius_m = "2 GHz" }')


@case_file("case_tolerance_out_of_range", "CaseError", "must be between 1e-14 and 1e-2", "between",
           "a tolerance of 0.5", place="[solver.tolerance]")
def _() -> str:
    return _toml(extra="[solver]\ntolerance = 0.5\n")


@case_file("case_nodes_per_panel_bool", "CaseError", "must be an integer from 4 to 32", "from 4 to 32",
           "true where a number of nodes is expected (wrong type)", place="[solver.nodes_per_panel]")
def _() -> str:
    return _toml(extra="[solver]\nnodes_per_panel = true\n")


@case_file("case_wave_not_a_table", "CaseError", "must be a table", "table",
           "wave = 3 instead of a [wave] table", place="[wave]")
def _() -> str:
    return 'title = "bad"\nwave = 3\n[[body]]\nshape = { kind = "circle", radius_m = 0.05 }\nboundary = "pec"\n'


@case_file("case_unknown_boundary", "CaseError", "is 'metal'", "allowed: pec",
           "a boundary kind that does not exist", place="[body.0.boundary]")
def _() -> str:
    return _toml().replace('boundary = "pec"', 'boundary = "metal"')


@case_file("case_no_body", "CaseError", "is required", "at least one [[body]] table",
           "a case without any body", place="[body]")
def _() -> str:
    return 'title = "bad"\n[wave]\nfield = "tm"\nfrequency_hz = 3e9\n'


@case_file("case_empty", "CaseError", "is required", "[wave] with field and frequency_hz",
           "a zero-byte case file", place="[wave]")
def _() -> str:
    return ""


@case_file("case_invalid_toml", "CaseError", "invalid TOML", "correct the syntax there",
           "a key without a value", place="line 1")
def _() -> str:
    return "title = \n"


@case_file("case_not_utf8_latin1", "CaseError", "not UTF-8 text", "save the case file as UTF-8",
           "a title with an accent written in Latin-1", place="byte")
def _() -> str:
    return _toml().replace('title = "bad"', 'title = "coupe \xe9paisse"')


@case_file("case_missing_drawing", "CaseError", "does not exist", "correct the path in [geometry] file",
           "a drawing that is not there", place="[geometry.file]")
def _() -> str:
    return _toml(body='layer = "HULL"', extra='[geometry]\nfile = "no_such_drawing.dxf"\n')


@case_file("case_broken_drawing", "DrawingError", "empty", "save the drawing again",
           "a case whose drawing is a zero-byte file (the drawing's message, under the case's key)",
           place="[geometry.file]")
def _() -> str:
    return _toml(body='layer = "0"', extra='[geometry]\nfile = "dxf_empty.dxf"\n')


@case_file("case_unknown_layer", "CaseError", "holds no closed body", "layers with bodies",
           "a layer the drawing does not have", place="[body.0.layer]")
def _() -> str:
    return _toml(body='layer = "HULL"', extra='[geometry]\nfile = "dxf_duplicate_handles.dxf"\n')


@case_file("case_overlapping_bodies", "CaseError", "overlap or touch", "move them apart",
           "two inline circles that overlap", place="near (")
def _() -> str:
    return _toml() + ('[[body]]\nname = "second"\nshape = { kind = "circle", radius_m = 0.05, center_m = [0.05, 0] }\n'
                      'boundary = "pec"\n')


@case_file("case_line_source_inside", "CaseError", "is inside body", "outside every body",
           "a line source inside the body", place="[incident.0.position_m]")
def _() -> str:
    return _toml(extra='[[incident]]\nkind = "line"\nposition_m = [0, 0]\n')


@case_file("case_absurd_frequency", "CaseError", "is absurd", "give the frequency in Hz",
           "9.4e15 Hz for a 10 cm post: refused from a one-line estimate, before meshing",
           place="[wave] frequency_hz")
def _() -> str:
    return _toml(wave='field = "tm"\nfrequency_hz = 9.4e15')


@case_file("case_absurd_size", "CaseError", "an absurd size", "check the drawing's units",
           "a post of 10 000 km radius", place="[[body]] shape")
def _() -> str:
    return _toml(body='shape = { kind = "circle", radius_m = 1e7 }')


@case_file("case_near_field_too_many_points", "CaseError", "at most 25 million", "at most",
           "a near-field grid of 10^8 points", place="[near_field.count]")
def _() -> str:
    return _toml(extra="[near_field]\nx_m = [-1, 1]\ny_m = [-1, 1]\ncount = [10000, 10000]\n")


@case_file("case_unwritable_output", "CaseError", "cannot create the folder", "choose another --out",
           "--out below a plain file (an output folder that cannot be made)",
           argv=["run", "{file}", "--out", "{file}/out"])
def _() -> str:
    return _toml()


# ------------------------------------------------------------------------ main


def write_case(name: str, folder: Path) -> Path:
    """Write one case's file into ``folder`` and return its path."""
    entry = next(c for c in CASES if c["name"] == name)
    path = folder / entry["file"]
    _WRITERS[name](path)
    return path


def manifest() -> dict[str, Any]:
    """The manifest (also written as ``manifest.json``)."""
    return {"schema": "sectionwave.bad-corpus/1", "cases": CASES}


def main(argv: list[str] | None = None) -> int:
    """Write every case kept in the repository, and the manifest, into this folder."""
    folder = Path(argv[0]) if argv else HERE
    folder.mkdir(parents=True, exist_ok=True)
    for entry in CASES:
        if not entry["made_at_test_time"]:
            write_case(entry["name"], folder)
    (folder / "manifest.json").write_text(json.dumps(manifest(), indent=1) + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
