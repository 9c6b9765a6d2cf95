"""Drawings in, clean oriented bodies with exact curves out.

``read_drawing`` picks an importer (DXF, SVG or a plug-in) and returns a
:class:`Drawing` of exact pieces in metres; ``clean_drawing`` welds them
into oriented :class:`Body` objects with an audit of fixes and errors;
``inspect_drawing`` reports both as a JSON-able dict.

The readers and the cleaner load ezdxf, the XML parser and shapely only
when first used, so importing this package stays light.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from .curves import Bezier, Body, BSpline, Contour, EllipticalArc, Line, Segment, circular_arc
from .drawing import Drawing, LayerInfo, Piece, units_to_metres
from .errors import DrawingError, GeometryError, SectionwaveError, SectionwaveWarning
from .registry import Importer, ImporterInfo, get_importer, list_importers, read_drawing

if TYPE_CHECKING:
    from .clean import Audit, AuditItem, CleanResult, clean_drawing
    from .dxf import read_dxf
    from .inspect import format_inspection, inspect_drawing, write_preview_png
    from .svg import read_svg

__all__ = [
    "Audit",
    "AuditItem",
    "BSpline",
    "Bezier",
    "Body",
    "CleanResult",
    "Contour",
    "Drawing",
    "DrawingError",
    "EllipticalArc",
    "GeometryError",
    "Importer",
    "ImporterInfo",
    "LayerInfo",
    "Line",
    "Piece",
    "SectionwaveError",
    "SectionwaveWarning",
    "Segment",
    "circular_arc",
    "clean_drawing",
    "format_inspection",
    "get_importer",
    "inspect_drawing",
    "list_importers",
    "read_drawing",
    "read_dxf",
    "read_svg",
    "units_to_metres",
    "write_preview_png",
]

_LAZY = {
    "Audit": "clean",
    "AuditItem": "clean",
    "CleanResult": "clean",
    "clean_drawing": "clean",
    "read_dxf": "dxf",
    "read_svg": "svg",
    "format_inspection": "inspect",
    "inspect_drawing": "inspect",
    "write_preview_png": "inspect",
}


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        value = getattr(importlib.import_module(f".{_LAZY[name]}", __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
