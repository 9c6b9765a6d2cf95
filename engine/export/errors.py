"""Exceptions raised by the output writers.

Both derive from :class:`sectionwave.importers.errors.SectionwaveError` and
from the builtin that matches them, so a caller may catch either.
"""

from __future__ import annotations

from sectionwave.importers.errors import SectionwaveError

__all__ = ["ExportError", "OutputExistsError"]


class ExportError(SectionwaveError, ValueError):
    """Data handed to a writer cannot be written (bad shape, name or value)."""


class OutputExistsError(SectionwaveError, FileExistsError):
    """The output folder already holds results and overwriting was not allowed."""
