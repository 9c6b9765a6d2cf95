"""Exceptions and warnings shared by every part of sectionwave.

``SectionwaveError`` is the single root; each narrow subclass also inherits
the builtin that matches it, so callers may catch either.
"""

from __future__ import annotations

__all__ = [
    "DrawingError",
    "GeometryError",
    "SectionwaveError",
    "SectionwaveWarning",
]


class SectionwaveError(Exception):
    """Root of every error raised on purpose by sectionwave."""


class GeometryError(SectionwaveError, ValueError):
    """A curve, contour or body is malformed (open, self-crossing, degenerate)."""


class DrawingError(SectionwaveError, ValueError):
    """A drawing file cannot be turned into bodies."""


class SectionwaveWarning(UserWarning):
    """Root of sectionwave's warnings."""
