"""Drawings in, clean oriented bodies with exact curves out."""

from __future__ import annotations

from .curves import BSpline, Bezier, Body, Contour, EllipticalArc, Line, Segment, circular_arc
from .errors import DrawingError, GeometryError, SectionwaveError, SectionwaveWarning

__all__ = [
    "BSpline",
    "Bezier",
    "Body",
    "Contour",
    "DrawingError",
    "EllipticalArc",
    "GeometryError",
    "Line",
    "SectionwaveError",
    "SectionwaveWarning",
    "Segment",
    "circular_arc",
]
