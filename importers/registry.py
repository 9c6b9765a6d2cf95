"""Which importer reads which file: a small registry with plug-ins.

Built-in importers are listed by name and dotted path, so listing them
imports neither ezdxf nor the XML reader. Third-party importers register a
subclass of :class:`Importer` under the entry-point group
``sectionwave.importers``; one that fails to load is skipped with a
:class:`~sectionwave.importers.errors.SectionwaveWarning`.

:func:`read_drawing` chooses the importer by explicit ``format``, then by
the file's suffix, then by its first bytes.
"""

from __future__ import annotations

import importlib
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, ClassVar

from .drawing import Drawing
from .errors import DrawingError, SectionwaveWarning

if TYPE_CHECKING:
    from importlib import metadata

__all__ = [
    "ENTRY_POINT_GROUP",
    "DxfImporter",
    "Importer",
    "ImporterInfo",
    "SvgImporter",
    "get_importer",
    "list_importers",
    "read_drawing",
]

#: Entry-point group where third-party importers register.
ENTRY_POINT_GROUP = "sectionwave.importers"


class Importer:
    """Base class of drawing importers.

    Subclasses set the class attributes and implement :meth:`read` with
    explicit keyword options (no ``**kwargs``, so a command line can list
    them). ``units`` and ``layers`` are accepted by every importer.
    """

    #: Short name used as ``format=`` (``"dxf"``).
    name: ClassVar[str] = ""
    #: Lower-case file suffixes, with the dot (``(".dxf",)``).
    suffixes: ClassVar[tuple[str, ...]] = ()
    #: One line for listings.
    description: ClassVar[str] = ""

    @classmethod
    def can_read(cls, path: str | Path) -> bool:
        """Whether the file's first bytes look like this format."""
        return False

    def read(
        self,
        path: str | Path,
        *,
        units: str | float | None = None,
        layers: str | Sequence[str] | None = None,
    ) -> Drawing:
        """Read ``path`` into a :class:`Drawing` (metres)."""
        raise NotImplementedError


class DxfImporter(Importer):
    """AutoCAD DXF, ASCII or binary, read with ezdxf."""

    name = "dxf"
    suffixes = (".dxf",)
    description = "AutoCAD DXF (ASCII or binary), exact lines, arcs, ellipses, splines, blocks"

    @classmethod
    def can_read(cls, path: str | Path) -> bool:
        from .dxf import is_dxf_file

        return is_dxf_file(path)

    def read(
        self,
        path: str | Path,
        *,
        units: str | float | None = None,
        layers: str | Sequence[str] | None = None,
        hatch_boundaries: bool = True,
    ) -> Drawing:
        from .dxf import read_dxf

        return read_dxf(path, units=units, layers=layers, hatch_boundaries=hatch_boundaries)


class SvgImporter(Importer):
    """Scalable Vector Graphics, read with a safe XML parser."""

    name = "svg"
    suffixes = (".svg",)
    description = "SVG paths and shapes with exact transforms, viewBox and units"

    @classmethod
    def can_read(cls, path: str | Path) -> bool:
        from .svg import is_svg_file

        return is_svg_file(path)

    def read(
        self,
        path: str | Path,
        *,
        units: str | float | None = None,
        layers: str | Sequence[str] | None = None,
        paint: str = "auto",
    ) -> Drawing:
        from .svg import read_svg

        return read_svg(path, units=units, layers=layers, paint=paint)


@dataclass(frozen=True)
class ImporterInfo:
    """What is known about an importer without loading its module."""

    name: str
    target: str
    suffixes: tuple[str, ...]
    description: str
    is_builtin: bool


_BUILTINS: tuple[ImporterInfo, ...] = (
    ImporterInfo("dxf", "sectionwave.importers.registry:DxfImporter", DxfImporter.suffixes,
                 DxfImporter.description, True),
    ImporterInfo("svg", "sectionwave.importers.registry:SvgImporter", SvgImporter.suffixes,
                 SvgImporter.description, True),
)


def _plugin_entry_points() -> list[metadata.EntryPoint]:
    from importlib import metadata  # imported here: it costs tens of ms and a solve never needs it

    try:
        return list(metadata.entry_points(group=ENTRY_POINT_GROUP))
    except Exception as exc:  # noqa: BLE001 - broken metadata must not stop the built-ins
        warnings.warn(
            f"cannot list importer plug-ins ({exc})", SectionwaveWarning, stacklevel=3
        )
        return []


def _load_target(target: str) -> type[Importer]:
    module, _, attr = target.partition(":")
    obj = getattr(importlib.import_module(module), attr)
    if not (isinstance(obj, type) and issubclass(obj, Importer)):
        raise TypeError(f"{target} is not a subclass of sectionwave.importers.Importer")
    return obj


def _plugins() -> dict[str, type[Importer]]:
    """Third-party importers that load; broken ones are skipped with a warning."""
    found: dict[str, type[Importer]] = {}
    builtin = {i.name for i in _BUILTINS}
    for ep in _plugin_entry_points():
        try:
            cls = ep.load()
            if not (isinstance(cls, type) and issubclass(cls, Importer)):
                raise TypeError("not a subclass of sectionwave.importers.Importer")
            if not cls.name:
                raise TypeError("its class attribute 'name' is empty")
        except Exception as exc:  # noqa: BLE001 - a broken plug-in must not crash the reader
            warnings.warn(
                f"importer plug-in {ep.name!r} ({ep.value}) skipped: {exc}",
                SectionwaveWarning,
                stacklevel=3,
            )
            continue
        if cls.name in builtin:
            warnings.warn(
                f"importer plug-in {ep.name!r} ({ep.value}) skipped: the name {cls.name!r} "
                f"belongs to a built-in importer",
                SectionwaveWarning,
                stacklevel=3,
            )
            continue
        found[cls.name] = cls
    return found


def list_importers(*, include_plugins: bool = True) -> list[ImporterInfo]:
    """Every importer: the built-ins (without importing them), then plug-ins.

    Parameters
    ----------
    include_plugins
        Also load and list the entry-point plug-ins.

    Returns
    -------
    list of ImporterInfo
        Name, dotted target, suffixes and description of each.

    Examples
    --------
    >>> [i.name for i in list_importers(include_plugins=False)]
    ['dxf', 'svg']
    """
    infos = list(_BUILTINS)
    if include_plugins:
        for name, cls in _plugins().items():
            infos.append(ImporterInfo(name, f"{cls.__module__}:{cls.__qualname__}",
                                      tuple(s.lower() for s in cls.suffixes),
                                      cls.description, False))
    return infos


def get_importer(name: str) -> Importer:
    """Return the importer registered as ``name`` (built-in or plug-in).

    Raises
    ------
    DrawingError
        If no importer has that name.
    """
    key = name.strip().lower().lstrip(".")
    for info in _BUILTINS:
        if info.name == key:
            return _load_target(info.target)()
    plugins = _plugins()
    if key in plugins:
        return plugins[key]()
    known = [i.name for i in _BUILTINS] + sorted(plugins)
    raise DrawingError(f"unknown drawing format {name!r}; known formats: {', '.join(known)}")


def read_drawing(
    path: str | Path,
    *,
    format: str | None = None,
    units: str | float | None = None,
    layers: str | Sequence[str] | None = None,
) -> Drawing:
    """Read a drawing with the importer chosen by format, suffix or content.

    Parameters
    ----------
    path
        Drawing file.
    format
        Importer name (``"dxf"``, ``"svg"`` or a plug-in's); overrides the
        suffix.
    units
        Drawing unit, overriding what the file says (required for unitless
        DXF files).
    layers
        Layer names or globs to read.

    Returns
    -------
    Drawing
        Pieces in metres.

    Raises
    ------
    DrawingError
        If the file is missing, no importer recognises it, or the importer
        refuses it.
    """
    p = Path(path)
    if not p.is_file():
        raise DrawingError(f"{p}: no such file")
    if format is not None:
        return get_importer(format).read(p, units=units, layers=layers)
    suffix = p.suffix.lower()
    infos = list_importers()
    for info in infos:
        if suffix and suffix in info.suffixes:
            return get_importer(info.name).read(p, units=units, layers=layers)
    for info in infos:
        imp = get_importer(info.name)
        if imp.can_read(p):
            return imp.read(p, units=units, layers=layers)
    raise DrawingError(
        f"{p}: unknown drawing format (suffix {suffix or '(none)'!r} and content match no "
        f"importer: {', '.join(i.name for i in infos)}); give format="
    )
