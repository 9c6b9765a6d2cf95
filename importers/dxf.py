"""Read DXF drawings (ASCII and binary) into exact pieces of outline.

Every outline entity becomes an exact segment: LINE a :class:`Line`; ARC,
CIRCLE and ELLIPSE an :class:`EllipticalArc` (its axes matrix also holds
mirroring and unequal block scaling, so no arc is ever approximated);
SPLINE a rational :class:`BSpline` with the file's knots and weights;
LWPOLYLINE and 2D POLYLINE lines and arcs from their bulges; HATCH its
boundary paths; INSERT (and MINSERT arrays) the pieces of its block under
the exact affine map of the reference, nested to any depth.

Entities that are not outline (TEXT, MTEXT, DIMENSION, POINT, ...) are
counted in :attr:`Drawing.skipped` and never guessed at. Entities that are
not flat in the drawing plane (3DFACE, MESH, 3D polylines whose vertices
do not share one height, an arc whose extrusion is tilted) are refused, with
their handle in the message. A SPLINE whose knots repeat ``degree`` times
(CAD programs' NURBS circles, arcs and joined Bezier pieces) is cut into one
segment per piece at those joints. An entity that ezdxf cannot read at all
(subclass markers left out by an old writer) is dropped, named in the notes,
and the rest of the file is read.

Only model space is read.
"""

from __future__ import annotations

import logging
import math
import re
from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from .curves import BSpline, EllipticalArc, Line, Segment
from .drawing import (
    Drawing,
    LayerInfo,
    Piece,
    check_coordinates,
    select_pieces,
    units_to_metres,
)
from .errors import DrawingError, GeometryError

__all__ = [
    "INSUNITS_M",
    "MAX_DXF_BYTES",
    "MAX_DXF_PIECES",
    "is_dxf_file",
    "read_dxf",
]

logger = logging.getLogger(__name__)

#: Metres per drawing unit for each $INSUNITS code (0, unitless, is absent).
INSUNITS_M: dict[int, tuple[str, float]] = {
    1: ("in", 0.0254),
    2: ("ft", 0.3048),
    3: ("mi", 1609.344),
    4: ("mm", 1e-3),
    5: ("cm", 1e-2),
    6: ("m", 1.0),
    7: ("km", 1e3),
    8: ("uin", 0.0254e-6),
    9: ("mil", 0.0254e-3),
    10: ("yd", 0.9144),
    11: ("angstrom", 1e-10),
    12: ("nm", 1e-9),
    13: ("um", 1e-6),
    14: ("dm", 0.1),
    15: ("dam", 10.0),
    16: ("hm", 100.0),
}

#: Relative tolerance for "flat in the drawing plane" (z spread, tilt of an axis).
FLAT_TOL = 1e-9

#: Entities that are annotation or construction, counted and skipped.
_NOT_OUTLINE = frozenset(
    {
        "TEXT", "MTEXT", "ATTRIB", "ATTDEF", "DIMENSION", "ARC_DIMENSION",
        "LARGE_RADIAL_DIMENSION", "LEADER", "MLEADER", "MULTILEADER", "TOLERANCE",
        "POINT", "XLINE", "RAY", "IMAGE", "WIPEOUT", "VIEWPORT", "OLE2FRAME",
        "SOLID", "TRACE", "SHAPE", "ACAD_TABLE", "UNDERLAY", "PDFUNDERLAY",
        "DWFUNDERLAY", "DGNUNDERLAY", "HELIX", "MLINE", "SEQEND",
    }
)

#: Entities that describe 3D geometry: refused, a cross-section is flat.
_THREE_D = frozenset(
    {"3DFACE", "3DSOLID", "BODY", "REGION", "SURFACE", "MESH", "EXTRUDEDSURFACE",
     "LOFTEDSURFACE", "REVOLVEDSURFACE", "SWEPTSURFACE", "PLANESURFACE", "POLYFACE",
     "POLYMESH"}
)

_MAX_BLOCK_DEPTH = 64

_EOF_RE = re.compile(rb"(?:^|\n)[ \t]*0[ \t]*\r?\n[ \t]*EOF[ \t]*(?:\r?\n|$)")


# --------------------------------------------------------------------------- sniffing


def is_dxf_file(path: str | Path) -> bool:
    """Whether the file's first bytes look like a DXF file (ASCII or binary).

    Parameters
    ----------
    path
        File to look at; only its first 4 KiB are read.

    Returns
    -------
    bool
        True for a binary DXF sentinel or an ASCII file opening with a
        ``0 / SECTION`` pair (after optional ``999`` comments).
    """
    try:
        with open(path, "rb") as fh:
            head = fh.read(4096)
    except OSError:
        return False
    return _is_binary_head(head) or _is_ascii_head(head)


def _is_binary_head(head: bytes) -> bool:
    return head.startswith(b"AutoCAD Binary DXF\r\n\x1a\x00")


def _is_ascii_head(head: bytes) -> bool:
    text = head.decode("latin-1").lstrip("\ufeff\xef\xbb\xbf")
    lines = [ln.strip() for ln in text.splitlines()]
    i = 0
    while i + 1 < len(lines):
        if not lines[i]:
            i += 1
            continue
        if lines[i] == "999":
            i += 2
            continue
        return lines[i] == "0" and lines[i + 1].upper() == "SECTION"
    return False


# --------------------------------------------------------------------------- loading


@contextmanager
def _captured_ezdxf_log(notes: list[str]) -> Iterator[None]:
    """Collect ezdxf's log lines into the audit instead of the user's terminal.

    ezdxf logs one line per repaired handle; a damaged file can produce
    hundreds. They are kept as one summarising note.
    """
    records: list[logging.LogRecord] = []

    class _Keep(logging.Handler):
        def emit(self, record: logging.LogRecord) -> None:
            records.append(record)

    lib = logging.getLogger("ezdxf")
    handler = _Keep(level=logging.INFO)
    old_propagate = lib.propagate
    lib.addHandler(handler)
    lib.propagate = False
    try:
        yield
    finally:
        lib.removeHandler(handler)
        lib.propagate = old_propagate
        if records:
            first = records[0].getMessage()
            notes.append(
                f"ezdxf reported {len(records)} message(s) while loading; first: {first}"
            )


#: Files larger than this are first read by ezdxf's strict reader (see ``_load``).
FAST_READ_BYTES = 4 << 20


#: Largest DXF file read (bytes); larger files are refused before reading.
MAX_DXF_BYTES = 128 * 1024 * 1024

#: Most outline entities a drawing may expand to through (nested) block references.
#: A cross-section the solver can take (dense LU, some 15 000 unknowns of 16
#: per panel) has at most a few thousand pieces; expanding block arrays costs
#: about 0.1 ms a copy, so this also bounds the time spent before refusing.
MAX_DXF_PIECES = 20_000


def _load(path: Path, notes: list[str], max_bytes: int = MAX_DXF_BYTES) -> Any:  # noqa: C901 - reader fallbacks for binary, strict, recovered and damaged files
    import ezdxf
    from ezdxf import recover
    from ezdxf.lldxf.const import DXFError

    if not path.is_file():
        raise DrawingError(f"{path}: no such file")
    size = path.stat().st_size
    if size > max_bytes:
        raise DrawingError(
            f"{path}: the file is {size} bytes, over the {max_bytes}-byte cap for DXF; "
            f"raise max_bytes if the drawing is genuine"
        )
    if size == 0:
        raise DrawingError(f"{path}: the file is empty (0 bytes); save the drawing again")
    with open(path, "rb") as fh:
        data = fh.read()
    head = data[:4096]
    doc: Any
    try:
        with _captured_ezdxf_log(notes):
            if _is_binary_head(head):
                # ezdxf.recover cannot read binary DXF; the strict reader can.
                doc = ezdxf.readfile(path)
                notes.append("binary DXF read with the strict reader (no repair pass)")
                return doc
            if not _is_ascii_head(head):
                shown = head[:24].decode("latin-1", errors="replace")
                looks = head.lstrip(b"\xef\xbb\xbf \t\r\n")
                hint = ("; it looks like SVG: rename it to .svg"
                        if looks.startswith(b"<") and b"<svg" in head else
                        "; check the file or give the right format")
                raise DrawingError(
                    f"{path}: not a DXF file (it starts with {shown!r}, a DXF file starts "
                    f"with '0' / 'SECTION'){hint}"
                )
            if not _EOF_RE.search(data):
                tail = [ln.strip() for ln in data[-256:].decode("latin-1").splitlines()]
                tail = [ln for ln in tail if ln]
                if tail[-2:] != ["0", "ENDSEC"]:
                    raise DrawingError(
                        f"{path}: the file is truncated: it ends inside a section after "
                        f"{len(data)} bytes, without the end marker '0 / EOF', so entities "
                        f"may be missing; save or copy the drawing again"
                    )
                notes.append("the file lacks the final '0 / EOF' marker after a complete "
                             "section: accepted")
            doc = None
            auditor: Any = None
            if len(data) > FAST_READ_BYTES:
                # The recovering reader rebuilds every tag and costs about three
                # times the strict one on large drawings; a well-formed large file
                # is read strictly and audited, anything the strict reader rejects
                # goes through the recovering reader as before.
                try:
                    doc = ezdxf.readfile(path)
                    auditor = doc.audit()
                    notes.append("large file read with the strict reader and audited")
                except DXFError:
                    doc = None
            if doc is None:
                try:
                    doc, auditor = recover.readfile(path)
                except _LOAD_ERRORS as exc:
                    doc, auditor = _load_without_bad_entities(path, data, exc, notes)
            if any("conflicting handle" in str(e.message) for e in auditor.fixes):
                # ezdxf deletes the second entity of a repeated handle; give it
                # a new handle instead so no geometry is lost.
                fixed = _renumber_repeated_handles(data, notes)
                if fixed is not None:
                    import io

                    with _captured_ezdxf_log([]):
                        doc, auditor = recover.read(io.BytesIO(fixed))
    except DrawingError:
        raise
    except _LOAD_ERRORS as exc:
        raise DrawingError(f"{path}: cannot read the DXF file ({exc}); save it again") from exc
    for entry in list(auditor.fixes) + list(auditor.errors):
        notes.append(f"repaired: {entry.message}")
    return doc


def _renumber_repeated_handles(data: bytes, notes: list[str]) -> bytes | None:
    """Drop the handle (group 5) of every entity repeating an earlier one's.

    ezdxf then gives those entities fresh handles. Returns ``None`` when no
    entity repeats a handle (the conflict is elsewhere, in a table).
    """
    lines = data.split(b"\n")
    seen: set[str] = set()
    drop: list[int] = []
    for start, end, typ, handle in _entity_chunks(lines):
        if not handle:
            continue
        if handle in seen:
            for i in range(start, end - 1, 2):
                if lines[i].strip() == b"5":
                    drop.append(i)
                    break
            notes.append(
                f"{typ} at line {start + 1} repeats handle #{handle}: given a new handle "
                f"(the file's handles are not unique; saving it again fixes them)"
            )
        seen.add(handle)
    if not drop:
        return None
    gone = set(drop) | {i + 1 for i in drop}
    return b"\n".join(ln for i, ln in enumerate(lines) if i not in gone)


#: What ezdxf may raise on a damaged file. Its own ``DXFError`` derives from
#: ``Exception`` only, and a hostile file reaches ``IndexError``, ``KeyError``,
#: ``TypeError``... deep inside it, so every ordinary exception is caught
#: while loading and turned into a ``DrawingError`` naming the file.
_LOAD_ERRORS: tuple[type[Exception], ...] = (Exception,)

#: Most unreadable entities dropped from one file before the file is refused.
MAX_DROPPED_ENTITIES = 20

#: Time allowed for finding unreadable entities (each try reads the file again).
RECOVERY_SECONDS = 1.0

_ENTITY_IN_MESSAGE_RE = re.compile(r"\b([A-Z0-9_]+)\(#([0-9A-Fa-f]*)\)")

#: Entities that belong to the entity before them (a POLYLINE's vertices, an INSERT's attributes).
_FOLLOWERS = frozenset({"VERTEX", "SEQEND", "ATTRIB"})


def _entity_chunks(lines: list[bytes]) -> list[tuple[int, int, str, str]]:
    """``(first line, end line, type, handle)`` of each entity in ENTITIES and BLOCKS.

    ``lines`` are the file's lines; a DXF tag is a pair of lines (group
    code, value). Followers (VERTEX, SEQEND, ATTRIB) stay with their owner.
    """
    chunks: list[tuple[int, int, str, str]] = []
    in_section = False
    start = -1
    typ = handle = ""
    n = len(lines) - 1
    i = 0

    def close(end: int) -> None:
        if start >= 0:
            chunks.append((start, end, typ, handle))

    while i < n:
        code, value = lines[i].strip(), lines[i + 1].strip()
        if code == b"0":
            name = value.decode("latin-1").upper()
            if name == "SECTION" and i + 3 <= n:
                sec = lines[i + 3].strip().decode("latin-1").upper()
                in_section = sec in ("ENTITIES", "BLOCKS")
                close(i)
                start = -1
            elif name in ("ENDSEC", "EOF", "BLOCK", "ENDBLK") or not in_section:
                close(i)
                start = -1
            elif name not in _FOLLOWERS or start < 0:
                close(i)
                start, typ, handle = i, name, ""
        elif code == b"5" and start >= 0 and not handle:
            handle = value.decode("latin-1").upper()
        i += 2
    close(n + 1)
    return chunks


def _without(lines: list[bytes], drop: list[tuple[int, int, str, str]]) -> bytes:
    keep: list[bytes] = []
    pos = 0
    for a, b, _, _ in sorted(drop):
        keep.extend(lines[pos:a])
        pos = b
    keep.extend(lines[pos:])
    return b"\n".join(keep)


def _load_without_bad_entities(
    path: Path, data: bytes, first: BaseException, notes: list[str]
) -> tuple[Any, Any]:
    """Read a file that ezdxf refuses because of a few bad entities, dropping them.

    Old or home-made writers leave out markers (subclass markers ``100``,
    counts) that ezdxf needs for some entity types; one such entity makes
    the whole file unreadable. The entity named in ezdxf's message (type
    and handle) is dropped; when the message names none, the culprit is
    found by bisection over the entities (a few reads of the file). Each
    dropped entity is named in ``notes``. At most
    :data:`MAX_DROPPED_ENTITIES` are dropped, then the first error stands.
    """
    import io
    import time

    from ezdxf import recover

    if "Invalid group code" in str(first):
        # the tag stream itself is broken (a line lost or added): every tag
        # after it is misread, and dropping entities cannot mend that
        raise DrawingError(
            f"{path}: cannot read the DXF file ({first}); the file is damaged at that "
            f"line: save it again"
        ) from first
    lines = data.split(b"\n")
    chunks = _entity_chunks(lines)
    dropped: list[tuple[int, int, str, str]] = []
    exc: BaseException = first
    t_end = time.monotonic() + RECOVERY_SECONDS

    class _OutOfTime(Exception):
        pass

    def attempt(subset_drop: list[tuple[int, int, str, str]]) -> tuple[Any, Any] | Exception:
        if time.monotonic() > t_end:
            raise _OutOfTime()
        try:
            with _captured_ezdxf_log([]):
                return recover.read(io.BytesIO(_without(lines, subset_drop)))
        except _LOAD_ERRORS as again:
            return again

    try:
        return _drop_until_readable(path, lines, chunks, dropped, exc, notes, attempt)
    except _OutOfTime:
        pass
    raise DrawingError(
        f"{path}: cannot read the DXF file ({first}); save it again"
    ) from first


def _drop_until_readable(
    path: Path, lines: list[bytes], chunks: list[tuple[int, int, str, str]],
    dropped: list[tuple[int, int, str, str]], exc: BaseException, notes: list[str],
    attempt: Callable[[list[tuple[int, int, str, str]]], tuple[Any, Any] | Exception],
) -> tuple[Any, Any]:
    first = exc
    for _ in range(MAX_DROPPED_ENTITIES):
        live = [c for c in chunks if c not in dropped]
        culprit: tuple[int, int, str, str] | None = None
        mt = _ENTITY_IN_MESSAGE_RE.search(str(exc))
        if mt is not None:
            typ, handle = mt.group(1).upper(), mt.group(2).upper()
            named = [c for c in live if c[2] == typ and (not handle or c[3] == handle)]
            if len(named) == 1:
                culprit = named[0]
        if culprit is None and live:
            # smallest prefix of the entities that still fails: its last one is bad
            lo, hi = 0, len(live)
            if isinstance(attempt(dropped + live), Exception):
                break  # the trouble is not in an entity
            while hi - lo > 1:
                mid = (lo + hi) // 2
                if isinstance(attempt(dropped + live[mid:]), Exception):
                    hi = mid
                else:
                    lo = mid
            culprit = live[lo]
        if culprit is None:
            break
        dropped.append(culprit)
        reason = str(exc) or type(exc).__name__
        notes.append(
            f"dropped unreadable entity {culprit[2]}"
            f"{' #' + culprit[3] if culprit[3] else ''} at line {culprit[0] + 1} ({reason}); "
            f"the rest of the file was read: redraw or re-save that entity"
        )
        done = attempt(dropped)
        if not isinstance(done, Exception):
            return done
        exc = done
    raise DrawingError(
        f"{path}: cannot read the DXF file ({first}); save it again"
    ) from first


# --------------------------------------------------------------------------- geometry


@dataclass
class _Raw:
    segment: Segment
    layer: str
    handle: str
    source: str
    dxftype: str


@dataclass
class _Sink:
    raws: list[_Raw] = field(default_factory=list)
    counts: Counter[str] = field(default_factory=Counter)
    skipped: Counter[str] = field(default_factory=Counter)


def _handle(entity: Any) -> str:
    return str(entity.dxf.get("handle", "") or "")


def _describe(entity: Any) -> str:
    h = _handle(entity)
    return f"{entity.dxftype()} #{h}" if h else entity.dxftype()


class _Reader:
    """Turns entities into raw segments in their layout's coordinates."""

    def __init__(self, doc: Any, path: Path, read_hatches: bool, notes: list[str]) -> None:
        self.doc = doc
        self.path = path
        self.read_hatches = read_hatches
        self.notes = notes
        self._blocks: dict[str, _Sink] = {}
        self._building: list[str] = []

    # -- errors ------------------------------------------------------------
    def refuse_3d(self, entity: Any, why: str) -> DrawingError:
        return DrawingError(
            f"{self.path}: 3D entity refused: {_describe(entity)} on layer "
            f"{entity.dxf.get('layer', '0')!r} {why}; sectionwave reads flat 2D "
            f"cross-sections: flatten the drawing or delete the entity"
        )

    def ocs_matrix(self, entity: Any) -> np.ndarray:
        """2 x 2 map from the entity's OCS (x, y) to world (x, y); refuse tilted planes."""
        ocs = entity.ocs()
        uz = ocs.uz
        if abs(uz.x) > FLAT_TOL or abs(uz.y) > FLAT_TOL:
            raise self.refuse_3d(entity, f"lies in a tilted plane (extrusion {tuple(uz)})")
        # Extrusion (0, 0, -1) gives ux = (-1, 0, 0), uy = (0, 1, 0) by the
        # arbitrary-axis rule: the OCS is mirrored and a counter-clockwise arc
        # in it runs clockwise in the world. The matrix carries both facts.
        ux, uy = ocs.ux, ocs.uy
        return np.array([[ux.x, uy.x], [ux.y, uy.y]])

    # -- entities ------------------------------------------------------------
    def visit(self, entity: Any, sink: _Sink, parent: str = "") -> None:
        typ = entity.dxftype()
        handler = _HANDLERS.get(typ)
        if handler is not None:
            try:
                handler(self, entity, sink, parent)
            except (DrawingError, GeometryError):
                raise
            except _LOAD_ERRORS as exc:
                # ezdxf loaded the entity but cannot expand it (a vertex
                # without a location, a bad bulge...): leave it out and say so.
                sink.skipped[f"unreadable {typ}"] += 1
                where = f"{_describe(entity)} of {parent}" if parent else _describe(entity)
                self.notes.append(
                    f"dropped unreadable entity {where} on layer "
                    f"{entity.dxf.get('layer', '0')!r} ({type(exc).__name__}: {exc}); "
                    f"the rest of the file was read: redraw or re-save that entity"
                )
        elif typ in _THREE_D:
            raise self.refuse_3d(entity, "is a surface or solid")
        else:
            sink.skipped[typ] += 1

    def emit(self, sink: _Sink, entity: Any, seg: Segment, parent: str, typ: str = "") -> None:
        typ = typ or entity.dxftype()
        h = _handle(entity)
        src = f"{typ} #{h}" if h else typ
        if parent:
            src = f"{src} of {parent}"
            h = h or parent.rsplit("#", 1)[-1]
        sink.raws.append(_Raw(seg, str(entity.dxf.get("layer", "0")), h, src, typ))

    def block(self, name: str, where: Any) -> _Sink | None:
        """Pieces of a block definition, in block coordinates (cached)."""
        if name in self._blocks:
            return self._blocks[name]
        if name in self._building:
            raise DrawingError(
                f"{self.path}: block {name!r} inserts itself (through "
                f"{' -> '.join(self._building)}); fix the block definitions"
            )
        if len(self._building) >= _MAX_BLOCK_DEPTH:
            raise DrawingError(f"{self.path}: blocks nested deeper than {_MAX_BLOCK_DEPTH}")
        layout = self.doc.blocks.get(name)
        if layout is None:
            self.notes.append(f"{_describe(where)} refers to missing block {name!r}: skipped")
            return None
        self._building.append(name)
        try:
            sink = _Sink()
            for sub in layout:
                self.visit(sub, sink)
        finally:
            self._building.pop()
        self._blocks[name] = sink
        return sink


def _line(r: _Reader, e: Any, sink: _Sink, parent: str) -> None:
    s, t = e.dxf.start, e.dxf.end
    if abs(s.z - t.z) > FLAT_TOL * max(1.0, abs(s.z), abs(t.z), (t - s).magnitude):
        raise r.refuse_3d(e, f"is not parallel to the drawing plane (z {s.z:g} to {t.z:g})")
    if (t - s).magnitude == 0.0:
        sink.skipped["zero-length LINE"] += 1
        return
    r.emit(sink, e, Line(np.array([s.x, s.y]), np.array([t.x, t.y])), parent)
    sink.counts["LINE"] += 1


def _arc_or_circle(r: _Reader, e: Any, sink: _Sink, parent: str) -> None:
    m = r.ocs_matrix(e)
    c = e.dxf.center
    radius = float(e.dxf.radius)
    typ = e.dxftype()
    if not radius > 0.0:
        sink.skipped[f"zero-radius {typ}"] += 1
        return
    if typ == "CIRCLE":
        th0, sweep = 0.0, 2.0 * math.pi
    else:
        a0, a1 = float(e.dxf.start_angle), float(e.dxf.end_angle)
        span = (a1 - a0) % 360.0
        if span == 0.0:
            span = 360.0
        th0, sweep = math.radians(a0), math.radians(span)
    arc = EllipticalArc(np.array([c.x, c.y]), radius * np.eye(2), th0, sweep).transformed(m)
    r.emit(sink, e, arc, parent)
    sink.counts[typ] += 1


def _ellipse(r: _Reader, e: Any, sink: _Sink, parent: str) -> None:
    ext = e.dxf.extrusion
    major = e.dxf.major_axis
    if abs(ext.x) > FLAT_TOL or abs(ext.y) > FLAT_TOL or abs(major.z) > FLAT_TOL * major.magnitude:
        raise r.refuse_3d(e, f"lies in a tilted plane (extrusion {tuple(ext)})")
    minor = e.minor_axis  # ratio * (extrusion x major): mirrored for extrusion -z
    c = e.dxf.center
    axes = np.array([[major.x, minor.x], [major.y, minor.y]])
    p0, p1 = float(e.dxf.start_param), float(e.dxf.end_param)
    sweep = (p1 - p0) % (2.0 * math.pi)
    if sweep <= 1e-12:
        sweep = 2.0 * math.pi
    r.emit(sink, e, EllipticalArc(np.array([c.x, c.y]), axes, p0, sweep), parent)
    sink.counts["ELLIPSE"] += 1


def _polyline(r: _Reader, e: Any, sink: _Sink, parent: str) -> None:
    typ = e.dxftype()
    mode = e.get_mode() if typ == "POLYLINE" else ""
    if mode == "AcDb3dPolyline":
        # Many writers flag every polyline 3D; one lying at a single height is
        # a flat outline (its virtual LINEs are in world coordinates).
        zs = [float(v.dxf.location.z) for v in e.vertices]
        xy = [(float(v.dxf.location.x), float(v.dxf.location.y)) for v in e.vertices]
        size = float(np.ptp(np.array(xy), axis=0).max()) if xy else 0.0
        if zs and max(zs) - min(zs) > FLAT_TOL * max(1.0, size, max(map(abs, zs))):
            raise r.refuse_3d(
                e, f"is a true 3D polyline (vertex z from {min(zs):g} to {max(zs):g}; a "
                f"3D polyline is read only when all its vertices share one z)"
            )
    elif typ == "POLYLINE" and mode != "AcDb2dPolyline":
        raise r.refuse_3d(e, f"is a {mode[4:]}")
    else:
        r.ocs_matrix(e)  # refuse tilted planes before expanding
    here = _describe(e)
    if parent:
        here = f"{here} of {parent}"
    # virtual_entities() gives exact LINE and ARC entities from the bulges,
    # with the polyline's own OCS on each ARC.
    sub_sink = _Sink()
    for sub in e.virtual_entities():
        r.visit(sub, sub_sink, here)
    sink.raws.extend(sub_sink.raws)
    sink.skipped.update(sub_sink.skipped)
    if sub_sink.raws:
        sink.counts[typ] += 1


def _spline(r: _Reader, e: Any, sink: _Sink, parent: str) -> None:
    try:
        tool = e.construction_tool()
    except Exception as exc:  # noqa: BLE001 - ezdxf raises several kinds here
        raise DrawingError(
            f"{r.path}: {_describe(e)} on layer {e.dxf.layer!r} is not a valid spline "
            f"({exc}); redraw it"
        ) from exc
    ctrl = np.array([tuple(p) for p in tool.control_points], dtype=float)
    z = ctrl[:, 2]
    size = float(np.ptp(ctrl[:, :2], axis=0).max()) if len(ctrl) else 0.0
    if np.ptp(z) > FLAT_TOL * max(1.0, size):
        raise r.refuse_3d(e, f"is not flat (control points z from {z.min():g} to {z.max():g})")
    if not e.control_point_count() and e.fit_point_count():
        r.notes.append(
            f"{_describe(e)} is given by fit points only: control points interpolated by "
            f"ezdxf, which may differ slightly from the CAD program's curve"
        )
    weights = np.asarray(tool.weights(), dtype=float) if tool.is_rational else None
    try:
        seg = BSpline(np.asarray(tool.knots(), dtype=float), ctrl[:, :2], int(tool.degree),
                      weights)
    except GeometryError as exc:
        raise DrawingError(
            f"{r.path}: {_describe(e)} on layer {e.dxf.layer!r} is not a valid spline "
            f"({exc}); redraw it"
        ) from exc
    # Knots repeated `degree` times (NURBS circles and arcs, joined Bezier
    # pieces) are C0 joints, possibly corners: one segment per piece, so the
    # contour and the mesher see each joint.
    for piece in seg.split_at_joints():
        r.emit(sink, e, piece, parent)
    sink.counts["SPLINE"] += 1


def _bulge_segment(p0: np.ndarray, p1: np.ndarray, bulge: float) -> Segment | None:
    """Line or exact circular arc between two polyline vertices (bulge = tan(sweep / 4))."""
    chord = p1 - p0
    if not np.any(chord):
        return None
    if bulge == 0.0:
        return Line(p0, p1)
    # The centre sits on the chord's perpendicular bisector, (1 - b^2) / (4 b)
    # chord lengths to the left (b > 0: counter-clockwise arc).
    perp = np.array([-chord[1], chord[0]])
    center = 0.5 * (p0 + p1) + (1.0 - bulge * bulge) / (4.0 * bulge) * perp
    radius = float(np.hypot(*(p0 - center)))
    start = math.atan2(p0[1] - center[1], p0[0] - center[0])
    return EllipticalArc(center, radius * np.eye(2), start, 4.0 * math.atan(bulge))


def _hatch(r: _Reader, e: Any, sink: _Sink, parent: str) -> None:
    if not r.read_hatches:
        sink.skipped["HATCH"] += 1
        return
    m = r.ocs_matrix(e)
    found = 0
    for path in e.paths:
        for seg in _hatch_path(r, e, path):
            r.emit(sink, e, seg.transformed(m), parent)
            found += 1
    if found:
        sink.counts[e.dxftype()] += 1


def _hatch_path(r: _Reader, e: Any, path: Any) -> Iterator[Segment]:
    kind = type(path).__name__
    if kind == "PolylinePath":
        verts = [np.array([v[0], v[1]], dtype=float) for v in path.vertices]
        bulges = [float(v[2]) if len(v) > 2 else 0.0 for v in path.vertices]
        n = len(verts)
        last = n if path.is_closed else n - 1
        for i in range(last):
            seg = _bulge_segment(verts[i], verts[(i + 1) % n], bulges[i])
            if seg is not None:
                yield seg
        return
    for edge in path.edges:
        ek = type(edge).__name__
        if ek == "LineEdge":
            a, b = edge.start, edge.end
            if (a.x, a.y) != (b.x, b.y):
                yield Line(np.array([a.x, a.y]), np.array([b.x, b.y]))
        elif ek == "ArcEdge":
            # ezdxf keeps arc-edge angles in counter-clockwise order whatever
            # the edge's own direction; the direction does not matter here.
            span = (edge.end_angle - edge.start_angle) % 360.0 or 360.0
            yield EllipticalArc(
                np.array([edge.center.x, edge.center.y]), edge.radius * np.eye(2),
                math.radians(edge.start_angle), math.radians(span),
            )
        elif ek == "EllipseEdge":
            maj = edge.major_axis
            mn = (-maj.y * edge.ratio, maj.x * edge.ratio)
            span = (edge.end_angle - edge.start_angle) % 360.0 or 360.0
            yield EllipticalArc(
                np.array([edge.center.x, edge.center.y]),
                np.array([[maj.x, mn[0]], [maj.y, mn[1]]]),
                math.radians(edge.start_angle), math.radians(span),
            )
        elif ek == "SplineEdge":
            if not edge.control_points:
                raise DrawingError(
                    f"{r.path}: {_describe(e)} has a spline boundary edge given by fit "
                    f"points only; redraw the boundary or turn off hatch_boundaries"
                )
            ctrl = np.array([(p[0], p[1]) for p in edge.control_points], dtype=float)
            w = np.asarray(edge.weights, dtype=float) if len(edge.weights) else None
            try:
                spl = BSpline(np.asarray(edge.knot_values, dtype=float), ctrl,
                              int(edge.degree), w)
            except GeometryError as exc:
                raise DrawingError(
                    f"{r.path}: {_describe(e)} has an invalid spline boundary edge ({exc}); "
                    f"redraw the boundary or turn off hatch_boundaries"
                ) from exc
            yield from spl.split_at_joints()
        else:
            raise DrawingError(f"{r.path}: {_describe(e)} has an unknown boundary edge {ek}")


def _insert(r: _Reader, e: Any, sink: _Sink, parent: str) -> None:
    name = e.dxf.name
    block = r.block(name, e)
    sink.skipped["ATTRIB"] += len(e.attribs)
    if block is None:
        sink.skipped["INSERT of missing block"] += 1
        return
    if e.mcount * max(1, len(block.raws)) + len(sink.raws) > MAX_DXF_PIECES:
        raise DrawingError(
            f"{r.path}: {_describe(e)} on layer {e.dxf.get('layer', '0')!r} makes "
            f"{e.mcount} copies of block {name!r}, more than the {MAX_DXF_PIECES} entities "
            f"a drawing may expand to (a block reference bomb); explode or purge the blocks"
        )
    refs = list(e.multi_insert()) if e.mcount > 1 else [e]
    here = _describe(e) if not parent else f"{_describe(e)} of {parent}"
    ins_layer = str(e.dxf.get("layer", "0"))
    for ref in refs:
        m44 = ref.matrix44()
        ux = m44.transform_direction((1.0, 0.0, 0.0))
        uy = m44.transform_direction((0.0, 1.0, 0.0))
        o = m44.transform((0.0, 0.0, 0.0))
        if abs(ux.z) > FLAT_TOL * ux.magnitude or abs(uy.z) > FLAT_TOL * uy.magnitude:
            raise r.refuse_3d(e, "tilts its block out of the drawing plane")
        a = np.array([[ux.x, uy.x], [ux.y, uy.y]])
        if abs(np.linalg.det(a)) == 0.0:
            sink.skipped["INSERT with zero scale"] += 1
            continue
        b = np.array([o.x, o.y])
        for raw in block.raws:
            # Entities on layer "0" inside a block take the layer of the
            # reference (the DXF convention).
            layer = ins_layer if raw.layer == "0" else raw.layer
            sink.raws.append(
                _Raw(raw.segment.transformed(a, b), layer, raw.handle,
                     f"{raw.source} in {here}", raw.dxftype)
            )
        sink.counts.update(block.counts)
        sink.skipped.update(block.skipped)
    sink.counts["INSERT"] += len(refs)


_HANDLERS: dict[str, Callable[[_Reader, Any, _Sink, str], None]] = {
    "LINE": _line,
    "ARC": _arc_or_circle,
    "CIRCLE": _arc_or_circle,
    "ELLIPSE": _ellipse,
    "LWPOLYLINE": _polyline,
    "POLYLINE": _polyline,
    "SPLINE": _spline,
    "HATCH": _hatch,
    "INSERT": _insert,
}


def _expanded_count(doc: Any, path: Path) -> float:
    """How many entities the model space holds once every block reference is expanded.

    Counted on the block definitions, without building anything, so a
    reference bomb (blocks inserting blocks many times over) is refused at
    once. Self-insertion counts as nothing here; the reader reports it.
    """
    memo: dict[str, float] = {}
    busy: set[str] = set()

    def count(entities: Any) -> float:
        total = 0.0
        for e in entities:
            if e.dxftype() != "INSERT":
                total += 1.0
                continue
            name = str(e.dxf.get("name", ""))
            rows = max(1, int(e.dxf.get("row_count", 1) or 1))
            cols = max(1, int(e.dxf.get("column_count", 1) or 1))
            # each copy costs work even when its block is empty or missing
            total += rows * cols * max(1.0, block(name))
            if total > 10.0 * MAX_DXF_PIECES:
                return total
        return total

    def block(name: str) -> float:
        if name in memo:
            return memo[name]
        if name in busy:
            return 0.0
        if len(busy) >= _MAX_BLOCK_DEPTH:
            raise DrawingError(
                f"{path}: blocks nested deeper than {_MAX_BLOCK_DEPTH} (at block {name!r}); "
                f"explode the nested blocks"
            )
        layout = doc.blocks.get(name)
        if layout is None:
            return 0.0
        busy.add(name)
        try:
            memo[name] = count(layout)
        finally:
            busy.discard(name)
        return memo[name]

    return count(doc.modelspace())


# --------------------------------------------------------------------------- public


def read_dxf(
    path: str | Path,
    *,
    units: str | float | None = None,
    layers: str | Sequence[str] | None = None,
    hatch_boundaries: bool = True,
    max_bytes: int = MAX_DXF_BYTES,
) -> Drawing:
    """Read the model space of a DXF file into exact pieces, in metres.

    Parameters
    ----------
    path
        ASCII or binary DXF file. ASCII files are loaded with ezdxf's
        recovering reader and its repairs are kept in :attr:`Drawing.notes`.
    units
        Drawing unit (``"mm"``, ``"in"``, ... or metres per unit). Overrides
        the header's ``$INSUNITS``; required when that is 0 (unitless).
    layers
        Layer names or globs to read (case-insensitive). By default every
        layer that is on and not frozen is read.
    hatch_boundaries
        Read HATCH boundary paths as outline.
    max_bytes
        Larger files are refused before reading.

    Returns
    -------
    Drawing
        Pieces in metres with layer, handle and source of each.

    Raises
    ------
    DrawingError
        If the file is missing, not DXF, truncated, holds no outline, holds a
        3D entity, has unknown units, or no layer matches ``layers``.
    """
    # Hostile values (1e300, NaN) must end in the coordinate check below, not
    # in numpy's overflow warnings on the way there.
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        return _read_dxf(Path(path), units, layers, hatch_boundaries, max_bytes)


def _read_dxf(
    p: Path, units: str | float | None, layers: str | Sequence[str] | None,
    hatch_boundaries: bool, max_bytes: int,
) -> Drawing:
    notes: list[str] = []
    doc = _load(p, notes, max_bytes)
    total = _expanded_count(doc, p)
    if total > MAX_DXF_PIECES:
        raise DrawingError(
            f"{p}: the model space expands to about {total:.3g} entities through nested "
            f"block references (more than {MAX_DXF_PIECES}); a cross-section needs far "
            f"fewer: explode or purge the blocks, or check for a block reference bomb"
        )

    layer_info: dict[str, LayerInfo] = {}
    for layer in doc.layers:
        name = str(layer.dxf.name)
        layer_info[name] = LayerInfo(name, is_on=bool(layer.is_on()),
                                     is_frozen=bool(layer.is_frozen()))

    reader = _Reader(doc, p, hatch_boundaries, notes)
    sink = _Sink()
    for entity in doc.modelspace():
        reader.visit(entity, sink)
    found = [
        (Piece(raw.segment, raw.layer, raw.handle, raw.source), raw.dxftype) for raw in sink.raws
    ]
    selected = select_pieces(found, layers, layer_info, sink.skipped, str(p))

    if not selected:
        what = ", ".join(f"{n} {k}" for k, n in sorted(sink.skipped.items())) or "nothing"
        removed = [n for n in notes if n.startswith(("repaired: Deleted", "dropped"))]
        why = f"; while loading: {removed[0]}" if removed else ""
        raise DrawingError(
            f"{p}: no closed outline: the model space holds no outline geometry "
            f"(found {what}{why}); draw the cross-section with lines, arcs, polylines or "
            f"splines, or select other layers"
        )

    code = int(doc.header.get("$INSUNITS", 0) or 0)
    if units is not None:
        unit_name, scale = units_to_metres(units, where=str(p))
        if code in INSUNITS_M and INSUNITS_M[code][1] != scale:
            notes.append(f"$INSUNITS says {INSUNITS_M[code][0]}; overridden by units={units!r}")
    elif code in INSUNITS_M:
        unit_name, scale = INSUNITS_M[code]
    else:
        raise DrawingError(
            f"{p}: units unknown: $INSUNITS is {code} "
            f"({'unitless' if code == 0 else 'unsupported'}); give units, e.g. units='mm'"
        )

    m = scale * np.eye(2)
    pieces = [replace(pc, segment=pc.segment.transformed(m)) for pc in selected]
    check_coordinates(pieces, str(p))
    counts = Counter({k: v for k, v in sink.counts.items() if v})
    logger.debug("%s: %d pieces from %s", p, len(pieces), dict(counts))
    return Drawing(
        pieces=pieces,
        path=p,
        format="dxf",
        units=unit_name,
        scale_to_m=scale,
        layers=layer_info,
        entity_counts=counts,
        skipped=Counter({k: v for k, v in sink.skipped.items() if v}),
        notes=notes,
    )
