"""What an importer returns: exact pieces of outline, in metres, with their origin.

Glossary
--------
piece
    One exact curve segment read from a drawing, with the layer it sits on,
    the handle (DXF) or element id (SVG) it came from, and a short source
    text for messages. Pieces are not yet joined into contours; that is
    :func:`sectionwave.importers.clean.clean_drawing`'s job.
layer
    A named group of pieces (a DXF layer, an SVG group or Inkscape layer).
    Layers may be switched off or frozen in the drawing; importers report
    that state and skip such layers unless they are asked for by name.
units
    Every coordinate of a :class:`Drawing` is in metres. ``scale_to_m`` is
    the factor that was applied to the drawing's own numbers.
"""

from __future__ import annotations

import fnmatch
import math
from collections import Counter
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .curves import Segment
from .errors import DrawingError

__all__ = [
    "MAX_COORD_M",
    "UNIT_SCALES_M",
    "Drawing",
    "LayerInfo",
    "Piece",
    "check_coordinates",
    "check_layer_patterns",
    "normalise_layers",
    "select_layer",
    "select_pieces",
    "units_to_metres",
]

#: Length of one drawing unit in metres, by name (exact by definition:
#: 1 in = 25.4 mm, 1 ft = 12 in, 1 yd = 3 ft, 1 mil = 1/1000 in, 1 pt = 1/72 in,
#: 1 pc = 12 pt, 1 px = 1/96 in as CSS defines it).
UNIT_SCALES_M: dict[str, float] = {
    "m": 1.0,
    "km": 1000.0,
    "dm": 0.1,
    "cm": 0.01,
    "mm": 0.001,
    "um": 1e-6,
    "nm": 1e-9,
    "in": 0.0254,
    "ft": 0.3048,
    "yd": 0.9144,
    "mil": 0.0254e-3,
    "uin": 0.0254e-6,
    "pt": 0.0254 / 72.0,
    "pc": 0.0254 / 6.0,
    "px": 0.0254 / 96.0,
}


def units_to_metres(units: str | float, *, where: str = "") -> tuple[str, float]:
    """Name and metre scale of a unit given by name (``"mm"``) or as a number.

    Parameters
    ----------
    units
        A name from :data:`UNIT_SCALES_M` (case-insensitive; ``"inch"``,
        ``"meter"`` and ``"micron"`` are accepted too) or the length of one
        drawing unit in metres.
    where
        Text naming the file, for the error message.

    Returns
    -------
    tuple of (str, float)
        The unit's name and its length in metres.

    Raises
    ------
    DrawingError
        If the name is unknown or the number is not a positive finite value.

    Examples
    --------
    >>> units_to_metres("mm")
    ('mm', 0.001)
    >>> units_to_metres(0.0254)
    ('0.0254 m', 0.0254)
    """
    aliases = {"inch": "in", "inches": "in", "meter": "m", "metre": "m", "micron": "um",
               "feet": "ft", "foot": "ft", "millimeter": "mm", "millimetre": "mm"}
    prefix = f"{where}: " if where else ""
    if isinstance(units, str):
        key = units.strip().lower()
        key = aliases.get(key, key)
        if key not in UNIT_SCALES_M:
            raise DrawingError(
                f"{prefix}unknown units {units!r}; give one of "
                f"{', '.join(sorted(UNIT_SCALES_M))} or the size of one unit in metres"
            )
        return key, UNIT_SCALES_M[key]
    scale = float(units)
    if not (math.isfinite(scale) and scale > 0.0):
        raise DrawingError(f"{prefix}units must be a positive length in metres, got {units!r}")
    return f"{scale:g} m", scale


#: Largest coordinate accepted, metres: a cross-section a thousand kilometres
#: across is a unit mistake (or a hostile file), and squares of larger values
#: lose every digit of the areas and distances cleaning relies on.
MAX_COORD_M = 1e6


def check_coordinates(pieces: Sequence[Piece], where: str) -> None:
    """Refuse pieces with NaN, infinite or absurdly large coordinates.

    Parameters
    ----------
    pieces
        Pieces in metres.
    where
        The file, for the message.

    Raises
    ------
    DrawingError
        Naming the first bad piece (source and layer), its value and the fix.

    Examples
    --------
    >>> from sectionwave.importers.curves import Line
    >>> check_coordinates([Piece(Line((0, 0), (1, 1)))], "a.dxf")
    """
    for pc in pieces:
        seg = pc.segment
        pts = seg.points(np.array([0.0, 0.5, 1.0]))
        name = pc.source or seg.kind
        if not np.all(np.isfinite(pts)):
            raise DrawingError(
                f"{where}: {name} on layer {pc.layer!r} has a coordinate that is not a "
                f"finite number (NaN or infinity); fix or delete that entity"
            )
        big = float(np.abs(pts).max())
        if big > MAX_COORD_M:
            raise DrawingError(
                f"{where}: {name} on layer {pc.layer!r} reaches {big:.3g} m from the origin, "
                f"beyond the {MAX_COORD_M:.0e} m accepted; check the drawing's units or "
                f"move the cross-section near the origin"
            )


@dataclass(frozen=True, eq=False)
class Piece:
    """One exact segment of outline and where it came from.

    Parameters
    ----------
    segment
        The curve, in metres.
    layer
        Layer (DXF) or group/layer label (SVG) the piece belongs to.
    handle
        DXF entity handle or SVG element id (empty when the file has none).
    source
        Short text for messages, such as ``"ARC #2F in INSERT #31"``.
    """

    segment: Segment
    layer: str = "0"
    handle: str = ""
    source: str = ""


@dataclass(frozen=True)
class LayerInfo:
    """Name and state of one layer."""

    name: str
    is_on: bool = True
    is_frozen: bool = False

    @property
    def is_visible(self) -> bool:
        """True when the layer is on and not frozen."""
        return self.is_on and not self.is_frozen


@dataclass
class Drawing:
    """Exact pieces of outline read from one file, in metres.

    Attributes
    ----------
    pieces
        Every segment read, in file order.
    path
        The file read (``None`` for drawings built in memory).
    format
        Importer name, such as ``"dxf"`` or ``"svg"``.
    units
        Name of the drawing's own unit (``"mm"``, ``"px"``, ...).
    scale_to_m
        Metres per drawing unit; already applied to ``pieces``.
    layers
        Every layer the file declares or uses, by name.
    entity_counts
        How many entities (DXF types, SVG element names) gave pieces.
    skipped
        How many entities of each kind were not outline (text, dimensions,
        points, hidden elements, pieces on switched-off layers...).
    notes
        What the loader repaired or noticed (audit notes), one line each.
    left_out
        Shapes that were read but are not outline by the importer's rules
        (an SVG page background, unfilled shapes beside filled ones), one
        line each naming them and the option that would keep them.
    """

    pieces: list[Piece] = field(default_factory=list)
    path: Path | None = None
    format: str = ""
    units: str = "m"
    scale_to_m: float = 1.0
    layers: dict[str, LayerInfo] = field(default_factory=dict)
    entity_counts: Counter[str] = field(default_factory=Counter)
    skipped: Counter[str] = field(default_factory=Counter)
    notes: list[str] = field(default_factory=list)
    left_out: list[str] = field(default_factory=list)

    @property
    def name(self) -> str:
        """File name, or ``"(in memory)"``."""
        return str(self.path) if self.path is not None else "(in memory)"

    def end_points(self) -> np.ndarray:
        """Start and end points of every piece, shape ``(2 n, 2)`` (start, end, start...)."""
        if not self.pieces:
            return np.zeros((0, 2))
        return np.array([p for pc in self.pieces for p in (pc.segment.start, pc.segment.end)])

    def bounding_box(self) -> tuple[float, float, float, float]:
        """``(xmin, ymin, xmax, ymax)`` of the pieces, from a coarse sample of each."""
        if not self.pieces:
            raise DrawingError(f"{self.name}: the drawing holds no geometry")
        t = np.linspace(0.0, 1.0, 9)
        lo = np.full(2, np.inf)
        hi = np.full(2, -np.inf)
        for pc in self.pieces:
            pts = pc.segment.points(t) if pc.segment.kind != "line" else np.array(
                [pc.segment.start, pc.segment.end]
            )
            lo = np.minimum(lo, pts.min(axis=0))
            hi = np.maximum(hi, pts.max(axis=0))
        return float(lo[0]), float(lo[1]), float(hi[0]), float(hi[1])

    def diagonal(self) -> float:
        """Length of the bounding-box diagonal, in metres."""
        x0, y0, x1, y1 = self.bounding_box()
        return float(math.hypot(x1 - x0, y1 - y0))

    def layer_names(self) -> list[str]:
        """Names of the layers that hold pieces, in first-use order."""
        return list(dict.fromkeys(pc.layer for pc in self.pieces))


def select_layer(name: str, patterns: tuple[str, ...] | None, info: LayerInfo | None) -> bool:
    """Whether pieces on layer ``name`` are read.

    Parameters
    ----------
    name
        Layer name.
    patterns
        Layer names or shell-style globs (``"OUTLINE*"``), compared without
        regard to case as CAD programs do; ``None`` selects every visible
        layer.
    info
        The layer's state; a layer asked for by name is read even when it is
        switched off or frozen.

    Returns
    -------
    bool
        True when the layer is selected.

    Examples
    --------
    >>> select_layer("Hull", ("hu*",), None)
    True
    >>> select_layer("Hull", None, LayerInfo("Hull", is_on=False))
    False
    """
    if patterns is None:
        return info is None or info.is_visible
    key = name.casefold()
    return any(fnmatch.fnmatchcase(key, p.casefold()) for p in patterns)


def normalise_layers(layers: str | Sequence[str] | None) -> tuple[str, ...] | None:
    """Layer selection as a tuple of patterns (``None`` stays ``None``)."""
    if layers is None:
        return None
    if isinstance(layers, str):
        return (layers,)
    return tuple(layers)


def check_layer_patterns(
    patterns: tuple[str, ...] | None, names: Sequence[str], where: str
) -> None:
    """Raise ``DrawingError`` if a requested layer pattern matches no layer of the file."""
    if patterns is None:
        return
    for p in patterns:
        if not any(select_layer(n, (p,), None) for n in names):
            raise DrawingError(
                f"{where}: no layer matches {p!r}; the drawing has layers "
                f"{', '.join(repr(n) for n in names) or '(none)'}"
            )


def select_pieces(
    found: Iterable[tuple[Piece, str]],
    layers: str | Sequence[str] | None,
    layer_info: dict[str, LayerInfo],
    skipped: Counter[str],
    where: str,
) -> list[Piece]:
    """Keep the pieces on the selected layers and count the others as skipped.

    Parameters
    ----------
    found
        Every piece read, in file order, with the kind of entity it came
        from (``"ARC"``, ``"line"``...) for the count of skipped pieces.
    layers
        The importer's ``layers`` option: layer names or globs, or ``None``
        for every visible layer.
    layer_info
        Layers the file declares, by name; every layer a piece sits on is
        added to it (with the default state) when missing.
    skipped
        Counts of what was not read; each piece left out adds one to
        ``"<kind> on unselected layer"``.
    where
        Text naming the file, for the error message.

    Returns
    -------
    list of Piece
        The pieces on selected layers, in the order of ``found``.

    Raises
    ------
    DrawingError
        If a requested layer pattern matches no layer of the file.
    """
    candidates = list(found)
    for piece, _ in candidates:
        layer_info.setdefault(piece.layer, LayerInfo(piece.layer))
    patterns = normalise_layers(layers)
    check_layer_patterns(patterns, list(layer_info), where)
    selected = []
    for piece, kind in candidates:
        if select_layer(piece.layer, patterns, layer_info.get(piece.layer)):
            selected.append(piece)
        else:
            skipped[f"{kind} on unselected layer"] += 1
    return selected
