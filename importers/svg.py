"""Read SVG drawings into exact pieces of outline, in metres, y axis up.

The document is walked with a small reader on top of defusedxml's
ElementTree (entity declarations refused, size capped), so every transform
is applied exactly: lines stay lines, Bezier curves are mapped by their
control points, and elliptical arcs are converted from SVG's end-point form
to centre form and then mapped as an axes matrix, which stays exact under
skew and unequal scaling.

Handled: ``path`` (whole grammar: absolute and relative commands, implicit
repeats, packed numbers and arc flags such as ``a1 1 0 00 1 1``), ``rect``
(with ``rx``/``ry``), ``circle``, ``ellipse``, ``line``, ``polyline``,
``polygon``, ``g``, nested ``svg``, ``use`` (of elements and ``symbol``),
``transform`` (matrix, translate, scale, rotate, skewX, skewY), ``viewBox``
with ``preserveAspectRatio``, ``width``/``height`` in px, mm, cm, in, pt,
pc (1 px = 1/96 in, 1 in = 25.4 mm exactly), ``display:none`` and
``visibility:hidden``, ``switch`` (first child whose conditions hold). CSS
``<style>`` rules with simple selectors (tag, ``*``, ``.class``, ``#id``)
are applied; others are counted in the notes. Nested ``svg`` and ``symbol`` viewports take
their size from ``width``/``height`` (on the ``use`` first), else 100% of
the enclosing viewport; their clipping is not applied, and shapes reaching
outside them are named in the notes (as are ``clip-path`` and ``mask``).

Paint rule (``paint="auto"``), one an engineer can predict from the picture:

1. An axis-aligned rectangle enclosing every other shape is left out when it
   is filled white or nearly (luminance >= 0.9: a page background) or is
   unfilled and lies on the page edges within 1% (a page frame); repeated
   while one remains (a figure and an axes background).
2. Of the rest, filled shapes (``fill`` other than ``none``; SVG's default
   is black) are bodies. A filled subpath without ``Z`` is closed by a
   straight line, as SVG fills it.
3. Unfilled shapes (``fill="none"``, and every ``line``) are outline only
   when no shape is filled; otherwise they are left out.

What is left out is listed in :attr:`Drawing.left_out` (``inspect`` shows
it); ``paint="all"`` reads every shape as outline.

Layers: the ``inkscape:label`` of the nearest Inkscape layer group, else
the id (or label) of the top-level group holding the element, else ``"0"``.
"""

from __future__ import annotations

import logging
import math
import re
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from xml.etree.ElementTree import Element, ParseError

import numpy as np
from numpy.typing import NDArray

from .curves import Bezier, EllipticalArc, Line, Segment
from .drawing import (
    UNIT_SCALES_M,
    Drawing,
    LayerInfo,
    Piece,
    check_coordinates,
    select_pieces,
    units_to_metres,
)
from .errors import DrawingError

__all__ = [
    "MAX_SVG_BYTES",
    "PAINT_MODES",
    "arc_to_center",
    "is_svg_file",
    "parse_path_data",
    "parse_transform",
    "read_svg",
]

logger = logging.getLogger(__name__)

#: Largest SVG file read (bytes); larger files are refused before parsing.
MAX_SVG_BYTES = 64 * 1024 * 1024

#: Deepest element nesting accepted (the reader walks the tree recursively).
MAX_SVG_DEPTH = 200

#: Most elements visited, counting every expansion of ``<use>`` (a cross-section
#: has far fewer; the walk costs some microseconds per element).
MAX_SVG_ELEMENTS = 200_000

_SVG_NS = "http://www.w3.org/2000/svg"
_XLINK_HREF = "{http://www.w3.org/1999/xlink}href"
_INKSCAPE = "{http://www.inkscape.org/namespaces/inkscape}"

#: User units (px) per unit of a length written in an attribute.
_PX_PER_UNIT = {u: UNIT_SCALES_M[u] / UNIT_SCALES_M["px"] for u in ("mm", "cm", "in", "pt", "pc")}
_PX_PER_UNIT.update({"px": 1.0, "m": UNIT_SCALES_M["m"] / UNIT_SCALES_M["px"]})

_NUMBER = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_NUMBER_RE = re.compile(_NUMBER)
_LENGTH_RE = re.compile(rf"^\s*({_NUMBER})\s*(px|mm|cm|in|pt|pc|m|%)?\s*$")
_TRANSFORM_RE = re.compile(r"\s*,?\s*(matrix|translate|scale|rotate|skewX|skewY)\s*\(([^)]*)\)")

_NOT_RENDERED = frozenset(
    {"defs", "symbol", "clipPath", "mask", "pattern", "marker", "linearGradient",
     "radialGradient", "style", "title", "desc", "metadata", "filter", "script",
     "namedview", "font", "font-face", "cursor", "view"}
)
_SHAPES = frozenset({"path", "rect", "circle", "ellipse", "line", "polyline", "polygon"})

Matrix = np.ndarray


# --------------------------------------------------------------------------- small parsers


def _local(tag: Any) -> tuple[str, str]:
    """(namespace, local name) of an element tag."""
    if not isinstance(tag, str):
        return "?", ""
    if tag.startswith("{"):
        ns, _, name = tag[1:].partition("}")
        return ns, name
    return "", tag


def _translate(x: float, y: float) -> Matrix:
    return np.array([[1.0, 0.0, x], [0.0, 1.0, y], [0.0, 0.0, 1.0]])


def parse_transform(text: str | None, *, where: str = "") -> Matrix:
    """Parse an SVG ``transform`` attribute into a 3 x 3 affine matrix.

    Parameters
    ----------
    text
        Transform list such as ``"translate(10 5) rotate(30) skewX(10)"``.
    where
        Element description for error messages.

    Returns
    -------
    numpy.ndarray
        ``M`` with ``(x', y', 1) = M @ (x, y, 1)``, the list applied right to left.

    Raises
    ------
    DrawingError
        On unknown functions or wrong numbers of arguments.

    Examples
    --------
    >>> parse_transform("translate(1, 2) scale(3)") @ (1.0, 1.0, 1.0)
    array([4., 5., 1.])
    """
    m = np.eye(3)
    if not text or not text.strip():
        return m
    pos = 0
    text = text.strip()
    while pos < len(text):
        mt = _TRANSFORM_RE.match(text, pos)
        if mt is None:
            raise DrawingError(
                f"{where}: cannot read transform {text!r} at character {pos}; expected "
                f"matrix, translate, scale, rotate, skewX or skewY"
            )
        name, args = mt.group(1), [float(v) for v in _NUMBER_RE.findall(mt.group(2))]
        if not all(math.isfinite(v) for v in args):
            raise DrawingError(
                f"{where}: transform {text!r} holds a number too large to be finite; "
                f"give finite numbers"
            )
        pos = mt.end()
        while pos < len(text) and text[pos] in " \t\r\n,":
            pos += 1
        allowed = {"matrix": (6,), "translate": (1, 2), "scale": (1, 2), "rotate": (1, 3),
                   "skewX": (1,), "skewY": (1,)}[name]
        if len(args) not in allowed:
            raise DrawingError(
                f"{where}: {name}() takes {' or '.join(map(str, allowed))} numbers, got "
                f"{len(args)} in {text!r}"
            )
        if name == "matrix":
            a, b, c, d, e, f = args
            step = np.array([[a, c, e], [b, d, f], [0.0, 0.0, 1.0]])
        elif name == "translate":
            step = _translate(args[0], args[1] if len(args) == 2 else 0.0)
        elif name == "scale":
            sx = args[0]
            sy = args[1] if len(args) == 2 else sx
            step = np.diag([sx, sy, 1.0])
        elif name == "rotate":
            ang = math.radians(args[0])
            c, s = math.cos(ang), math.sin(ang)
            step = np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])
            if len(args) == 3:
                step = _translate(args[1], args[2]) @ step @ _translate(-args[1], -args[2])
        elif name == "skewX":
            step = np.array([[1.0, math.tan(math.radians(args[0])), 0.0], [0, 1, 0], [0, 0, 1]])
        else:
            step = np.array([[1.0, 0, 0], [math.tan(math.radians(args[0])), 1.0, 0], [0, 0, 1]])
        m = m @ step
    return m


def _scaled_length(
    value: str | None,
    default: float,
    where: str,
    attr: str,
    per_unit: dict[str, float],
    refusal_note: str = "",
) -> float:
    """Read a length with an optional unit (none: px) and scale it by ``per_unit``."""
    if value is None or not value.strip():
        return default
    mt = _LENGTH_RE.match(value)
    if mt is None or mt.group(2) == "%":
        raise DrawingError(
            f"{where}: cannot read {attr}={value!r}; give a number, optionally with a "
            f"unit px, mm, cm, in, pt or pc{refusal_note}"
        )
    return float(mt.group(1)) * per_unit[mt.group(2) or "px"]


def _length(value: str | None, default: float, where: str, attr: str) -> float:
    """Read a length attribute in user units (px), converting units in the value."""
    return _scaled_length(
        value, default, where, attr, _PX_PER_UNIT, " (percentages are not supported)"
    )


def _length_m(value: str | None, default: float, where: str, attr: str) -> float:
    """Read a width or height of the outermost ``<svg>`` in metres (no unit: px)."""
    return _scaled_length(value, default, where, attr, UNIT_SCALES_M)


_PRESENTATION = ("display", "visibility", "fill", "stroke", "fill-opacity", "overflow",
                 "clip-path", "mask")


_SIMPLE_SELECTOR_RE = re.compile(r"^(\*|[A-Za-z][\w-]*)?((?:[.#][\w-]+)*)$")
_RULE_RE = re.compile(r"([^{}@]+)\{([^{}]*)\}")


def _declarations(text: str) -> dict[str, str]:
    out: dict[str, str] = {}
    for item in text.split(";"):
        key, sep, val = item.partition(":")
        if sep:
            out[key.strip().lower()] = val.strip().lower().replace("!important", "").strip()
    return out


class _StyleSheet:
    """The document's CSS ``<style>`` rules with simple selectors.

    Design programs (Illustrator among them) paint through classes, such as
    ``.cls-1 { fill: none; stroke: #000 }``. Rules whose selectors are a
    tag, ``*``, classes and an id (``rect``, ``.a``, ``path.a.b``, ``#x``) are
    applied in order of specificity then position, after presentation
    attributes and before the ``style`` attribute; rules with combinators,
    pseudo-classes or attribute selectors, and at-rules, are not applied and
    counted in :attr:`skipped_rules`.
    """

    def __init__(self, root: Element) -> None:
        self.rules: list[tuple[tuple[int, int, int], int, str, set[str], set[str],
                               dict[str, str]]] = []
        self.skipped_rules = 0
        order = 0
        for el in root.iter():
            if _local(el.tag)[1] != "style" or not (el.text or "").strip():
                continue
            text = re.sub(r"/\*.*?\*/", "", el.text or "", flags=re.S)
            text = text.replace("<![CDATA[", "").replace("]]>", "")
            self.skipped_rules += text.count("@")
            for mt in _RULE_RE.finditer(text):
                decls = _declarations(mt.group(2))
                for sel in mt.group(1).split(","):
                    sm = _SIMPLE_SELECTOR_RE.match(sel.strip())
                    if sm is None or not sel.strip():
                        self.skipped_rules += 1
                        continue
                    tag = sm.group(1) if sm.group(1) not in (None, "*") else ""
                    parts = re.findall(r"[.#][\w-]+", sm.group(2))
                    classes = {q[1:] for q in parts if q[0] == "."}
                    ids = {q[1:] for q in parts if q[0] == "#"}
                    spec = (len(ids), len(classes), 1 if tag else 0)
                    self.rules.append((spec, order, tag, classes, ids, decls))
                    order += 1
        self.rules.sort(key=lambda r: (r[0], r[1]))

    def matching(self, el: Element) -> dict[str, str]:
        """Declarations of every rule matching ``el``, later and more specific winning."""
        if not self.rules:
            return {}
        tag = _local(el.tag)[1]
        classes = set((el.get("class") or "").split())
        ident = el.get("id")
        out: dict[str, str] = {}
        for _spec, _order, r_tag, r_classes, r_ids, decls in self.rules:
            if r_tag and r_tag != tag:
                continue
            if not r_classes <= classes:
                continue
            if r_ids and (len(r_ids) > 1 or ident not in r_ids):
                continue
            out.update(decls)
        return out


def _style(el: Element, sheet: _StyleSheet | None = None) -> dict[str, str]:
    # presentation attributes first, then the style sheet, then the style attribute
    out = {k: (el.get(k) or "").strip().lower() for k in _PRESENTATION if el.get(k) is not None}
    if sheet is not None:
        out.update(sheet.matching(el))
    out.update(_declarations(el.get("style") or ""))
    return out


# --------------------------------------------------------------------------- arcs


def arc_to_center(
    p0: Sequence[float], p1: Sequence[float], rx: float, ry: float, rotation_deg: float,
    large_arc: bool, sweep: bool,
) -> Segment | None:
    """Exact segment of an SVG end-point arc (``None`` when it is empty).

    Follows the conversion of the SVG specification (implementation notes,
    "conversion from endpoint to center parameterization"), radii scaled up
    when too small, a zero radius giving a line.

    Parameters
    ----------
    p0, p1
        Start and end points.
    rx, ry
        Radii (signs are ignored).
    rotation_deg
        Rotation of the ellipse's x axis, degrees.
    large_arc, sweep
        SVG flags (``sweep`` True: increasing angle).

    Returns
    -------
    Segment or None
        An :class:`EllipticalArc` (a :class:`Line` when a radius is zero).

    Examples
    --------
    >>> arc = arc_to_center((1, 0), (-1, 0), 1, 1, 0, False, True)
    >>> [round(float(v), 12) + 0.0 for v in arc.points(0.5)[0]]
    [0.0, 1.0]
    """
    a = np.asarray(p0, dtype=float)
    b = np.asarray(p1, dtype=float)
    if np.array_equal(a, b):
        return None
    rx, ry = abs(rx), abs(ry)
    if rx == 0.0 or ry == 0.0:
        return Line(a, b)
    phi = math.radians(rotation_deg % 360.0)
    c, s = math.cos(phi), math.sin(phi)
    dx, dy = (a - b) / 2.0
    x1 = c * dx + s * dy
    y1 = -s * dx + c * dy
    lam = (x1 / rx) ** 2 + (y1 / ry) ** 2
    if lam > 1.0:
        rx *= math.sqrt(lam)
        ry *= math.sqrt(lam)
    num = (rx * ry) ** 2 - (rx * y1) ** 2 - (ry * x1) ** 2
    den = (rx * y1) ** 2 + (ry * x1) ** 2
    coef = math.sqrt(max(0.0, num / den))
    if large_arc == sweep:
        coef = -coef
    cxp = coef * rx * y1 / ry
    cyp = -coef * ry * x1 / rx
    mid = (a + b) / 2.0
    center = np.array([c * cxp - s * cyp, s * cxp + c * cyp]) + mid
    th1 = math.atan2((y1 - cyp) / ry, (x1 - cxp) / rx)
    th2 = math.atan2((-y1 - cyp) / ry, (-x1 - cxp) / rx)
    dth = (th2 - th1) % (2.0 * math.pi)
    if not sweep and dth > 0.0:
        dth -= 2.0 * math.pi
    if dth == 0.0:
        return None
    axes = np.array([[c * rx, -s * ry], [s * rx, c * ry]])
    return EllipticalArc(center, axes, th1, dth)


# --------------------------------------------------------------------------- path data


class _Scanner:
    """Cursor over path data; flags of arcs are single characters."""

    def __init__(self, text: str, where: str) -> None:
        self.s = text
        self.i = 0
        self.where = where

    def skip(self) -> None:
        s, i = self.s, self.i
        while i < len(s) and s[i] in " \t\r\n\f,":
            i += 1
        self.i = i

    def at_end(self) -> bool:
        self.skip()
        return self.i >= len(self.s)

    def peek_command(self) -> str | None:
        self.skip()
        if self.i < len(self.s) and self.s[self.i].isalpha() and self.s[self.i] not in "eE":
            return self.s[self.i]
        return None

    def error(self, what: str) -> DrawingError:
        snippet = self.s[max(0, self.i - 10): self.i + 10]
        return DrawingError(
            f"{self.where}: bad path data at character {self.i} (near {snippet!r}): {what}; "
            f"correct the path data there"
        )

    def number(self) -> float:
        self.skip()
        mt = _NUMBER_RE.match(self.s, self.i)
        if mt is None:
            raise self.error("expected a number")
        self.i = mt.end()
        return float(mt.group(0))

    def flag(self) -> bool:
        self.skip()
        if self.i < len(self.s) and self.s[self.i] in "01":
            self.i += 1
            return self.s[self.i - 1] == "1"
        raise self.error("expected an arc flag 0 or 1")

    def has_number(self) -> bool:
        self.skip()
        return self.i < len(self.s) and self.s[self.i] in "+-.0123456789"


def parse_path_data(d: str, *, where: str = "") -> list[list[Segment]]:  # noqa: C901 - one branch per SVG path command
    """Exact segments of SVG path data, one list per subpath, in user units.

    Parameters
    ----------
    d
        The ``d`` attribute.
    where
        Element description for error messages.

    Returns
    -------
    list of list of Segment
        Lines, quadratic and cubic :class:`Bezier` curves and
        :class:`EllipticalArc` s; zero-length pieces are dropped.

    Raises
    ------
    DrawingError
        At the first character that does not fit the grammar.

    Examples
    --------
    >>> [len(sp) for sp in parse_path_data("M0 0h10v10H0z m20 0 l5 5")]
    [4, 1]
    """
    sc = _Scanner(d, where)
    subpaths: list[list[Segment]] = []
    cur = np.zeros(2)
    start = np.zeros(2)
    segs: list[Segment] = []
    cmd: str | None = None
    last_ctrl: np.ndarray | None = None
    last_kind = ""

    def add(seg: Segment | None) -> None:
        if seg is not None:
            segs.append(seg)

    def line_to(p: np.ndarray) -> None:
        if not np.array_equal(p, cur):
            add(Line(cur.copy(), p))

    def flush() -> None:
        nonlocal segs
        if segs:
            subpaths.append(segs)
        segs = []

    while not sc.at_end():
        letter = sc.peek_command()
        if letter is not None:
            if letter not in "MmZzLlHhVvCcSsQqTtAa":
                raise sc.error(f"unknown command {letter!r}")
            if cmd is None and letter not in "Mm":
                raise sc.error("path data must start with a moveto (M or m)")
            sc.i += 1
            cmd = letter
        elif cmd is None:
            raise sc.error("path data must start with a moveto (M or m)")
        elif cmd in "Zz":
            raise sc.error("numbers after a closepath (Z) need a command")
        rel = cmd.islower()
        base = cur if rel else np.zeros(2)
        up = cmd.upper()
        kind = up
        if up == "Z":
            line_to(start.copy())
            cur = start.copy()
            flush()
            last_kind = "Z"
            continue
        if up == "M":
            flush()
            cur = base + (sc.number(), sc.number())
            start = cur.copy()
            cmd = "l" if rel else "L"  # further pairs are implicit linetos
        elif up == "L":
            p = base + (sc.number(), sc.number())
            line_to(p)
            cur = p
        elif up == "H":
            x = sc.number() + (cur[0] if rel else 0.0)
            p = np.array([x, cur[1]])
            line_to(p)
            cur = p
        elif up == "V":
            y = sc.number() + (cur[1] if rel else 0.0)
            p = np.array([cur[0], y])
            line_to(p)
            cur = p
        elif up in "CS":
            if up == "C":
                c1 = base + (sc.number(), sc.number())
            else:
                c1 = 2 * cur - last_ctrl if last_kind in "CS" and last_ctrl is not None else cur
            c2 = base + (sc.number(), sc.number())
            p = base + (sc.number(), sc.number())
            pts = np.array([cur, c1, c2, p])
            if np.ptp(pts, axis=0).any():
                add(Bezier(pts))
            last_ctrl, cur, kind = c2, p, "C"
        elif up in "QT":
            if up == "Q":
                c1 = base + (sc.number(), sc.number())
            else:
                c1 = 2 * cur - last_ctrl if last_kind in "QT" and last_ctrl is not None else cur
            p = base + (sc.number(), sc.number())
            pts = np.array([cur, c1, p])
            if np.ptp(pts, axis=0).any():
                add(Bezier(pts))
            last_ctrl, cur, kind = c1, p, "Q"
        elif up == "A":
            rx, ry, rot = sc.number(), sc.number(), sc.number()
            large, sweep = sc.flag(), sc.flag()
            p = base + (sc.number(), sc.number())
            add(arc_to_center(tuple(cur), tuple(p), rx, ry, rot, large, sweep))
            cur = p
        if up not in "CSQT":
            last_ctrl = None
        last_kind = kind
        if sc.peek_command() is None and not sc.at_end() and not sc.has_number():
            raise sc.error("expected a number or a command")
    flush()
    return subpaths


# --------------------------------------------------------------------------- document


def is_svg_file(path: str | Path) -> bool:
    """Whether the file's first bytes look like SVG (an ``<svg`` tag near the start)."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(8192)
    except OSError:
        return False
    text = head.decode("utf-8", errors="replace").lstrip("\ufeff \t\r\n")
    return text.startswith("<") and "<svg" in text


def _parse_xml(path: Path, data: bytes) -> Element:
    import defusedxml.ElementTree as safe_et
    from defusedxml import DTDForbidden, EntitiesForbidden, ExternalReferenceForbidden

    try:
        return safe_et.fromstring(
            data, forbid_dtd=False, forbid_entities=True, forbid_external=True
        )
    except EntitiesForbidden as exc:
        if exc.sysid or exc.pubid:
            raise DrawingError(
                f"{path}: external entity refused: the SVG declares entity {exc.name!r} "
                f"that would read {exc.sysid or exc.pubid!r}; drawings may not pull in other "
                f"files: remove the <!ENTITY> declaration"
            ) from None
        raise DrawingError(
            f"{path}: entity declaration refused: the SVG declares entity {exc.name!r} "
            f"(entity expansion can blow up memory, the 'billion laughs' attack); "
            f"remove the <!DOCTYPE> internal subset or save as plain SVG"
        ) from None
    except ExternalReferenceForbidden as exc:
        raise DrawingError(
            f"{path}: external reference refused ({exc.sysid!r}); remove it"
        ) from None
    except DTDForbidden as exc:  # pragma: no cover - DTDs are allowed above
        raise DrawingError(f"{path}: DTD refused ({exc})") from None
    except LookupError as exc:
        raise DrawingError(
            f"{path}: the XML declaration names an unknown character encoding ({exc}); "
            f"save the file as UTF-8"
        ) from None
    except ParseError as exc:
        line, col = getattr(exc, "position", (0, 0))
        raise DrawingError(
            f"{path}: not well-formed XML at line {line}, column {col} ({exc}); "
            f"is this really an SVG file?"
        ) from None


def _viewport(
    el: Element, width: float, height: float, where: str
) -> tuple[Matrix, tuple[float, float, float, float] | None]:
    """Map from an element's viewBox to its viewport of ``width`` x ``height``."""
    vb_text = el.get("viewBox")
    if not vb_text:
        return np.eye(3), None
    vals = [float(v) for v in _NUMBER_RE.findall(vb_text)]
    if len(vals) != 4 or vals[2] <= 0 or vals[3] <= 0:
        raise DrawingError(
            f"{where}: viewBox={vb_text!r} needs four numbers with positive width and height"
        )
    vx, vy, vw, vh = vals
    sx, sy = width / vw, height / vh
    par = (el.get("preserveAspectRatio") or "xMidYMid meet").split()
    align = par[0] if par else "xMidYMid"
    if align == "none":
        tx = ty = 0.0
    else:
        s = max(sx, sy) if len(par) > 1 and par[1] == "slice" else min(sx, sy)
        sx = sy = s
        fx = {"xMin": 0.0, "xMid": 0.5, "xMax": 1.0}.get(align[:4], 0.5)
        fy = {"YMin": 0.0, "YMid": 0.5, "YMax": 1.0}.get(align[4:], 0.5)
        tx, ty = fx * (width - vw * s), fy * (height - vh * s)
    m = np.array([[sx, 0.0, tx - sx * vx], [0.0, sy, ty - sy * vy], [0.0, 0.0, 1.0]])
    return m, (vx, vy, vw, vh)


#: Paint modes of :func:`read_svg` (see the module docstring).
PAINT_MODES = ("auto", "all")

#: Named colours light enough to be paper (a page background), lower case.
_PAPER_NAMES = frozenset(
    {"white", "snow", "ivory", "ghostwhite", "whitesmoke", "floralwhite", "seashell",
     "linen", "mintcream", "azure", "aliceblue", "honeydew", "oldlace", "lavenderblush"}
)

#: Relative tolerance for "lies on the page edge" and "stays inside the viewport".
_PAGE_TOL_REL = 1e-2
_CLIP_TOL_REL = 1e-9


def _is_paper(colour: str) -> bool:
    """Whether a fill colour is white or nearly (relative luminance >= 0.9)."""
    c = colour.strip().lower()
    if c in _PAPER_NAMES:
        return True
    rgb: list[float] | None = None
    if re.fullmatch(r"#[0-9a-f]{3}", c):
        rgb = [int(ch * 2, 16) / 255 for ch in c[1:]]
    elif re.fullmatch(r"#[0-9a-f]{6}", c):
        rgb = [int(c[i: i + 2], 16) / 255 for i in (1, 3, 5)]
    else:
        mt = re.fullmatch(r"rgba?\(([^)]*)\)", c)
        if mt:
            parts = [v.strip() for v in mt.group(1).split(",")][:3]
            try:
                rgb = [float(v[:-1]) / 100 if v.endswith("%") else float(v) / 255 for v in parts]
            except ValueError:
                rgb = None
    if rgb is None or len(rgb) != 3:
        return False
    return 0.2126 * rgb[0] + 0.7152 * rgb[1] + 0.0722 * rgb[2] >= 0.9


@dataclass
class _Shape:
    """One rendered shape element, its exact pieces in the world frame, and its paint."""

    tag: str
    ident: str
    src: str
    layer: str
    segs: list[Segment]
    is_filled: bool
    fill: str
    order: int
    is_rect: bool = False
    box: tuple[float, float, float, float] = (0.0, 0.0, 0.0, 0.0)


def _is_axis_rectangle(segs: Sequence[Segment]) -> bool:
    """Four straight pieces, each horizontal or vertical, forming a closed loop."""
    if len(segs) != 4 or not all(isinstance(s, Line) for s in segs):
        return False
    pts = np.array([s.start for s in segs] + [segs[-1].end])
    size = float(np.ptp(pts, axis=0).max())
    if size == 0.0 or float(np.hypot(*(pts[0] - pts[-1]))) > 1e-9 * size:
        return False
    d = np.abs(np.diff(pts, axis=0))
    return bool(np.all(np.minimum(d[:, 0], d[:, 1]) <= 1e-9 * size))


def _box(segs: Sequence[Segment]) -> tuple[float, float, float, float]:
    p = np.vstack([s.points(np.linspace(0.0, 1.0, 33)) for s in segs])
    lo, hi = p.min(axis=0), p.max(axis=0)
    return (float(lo[0]), float(lo[1]), float(hi[0]), float(hi[1]))


def _encloses(outer: tuple[float, ...], inner: tuple[float, ...], tol: float) -> bool:
    return (outer[0] <= inner[0] + tol and outer[1] <= inner[1] + tol
            and outer[2] >= inner[2] - tol and outer[3] >= inner[3] - tol)


class _Walker:
    def __init__(self, path: Path, root: Element) -> None:
        self.path = path
        self.ids: dict[str, Element] = {}
        for el in root.iter():
            ident = el.get("id")
            if ident:
                self.ids.setdefault(ident, el)
        self.shapes: list[_Shape] = []
        self.counts: Counter[str] = Counter()
        self.skipped: Counter[str] = Counter()
        self.notes: list[str] = []
        self.layers: dict[str, LayerInfo] = {}
        self.budget = MAX_SVG_ELEMENTS
        self.serial = 0
        #: size (user units) of the viewport each percentage refers to
        self.viewports: list[tuple[float, float]] = [(0.0, 0.0)]
        self.sheet = _StyleSheet(root)

    def where(self, el: Element, tag: str) -> str:
        ident = el.get("id")
        return f"{self.path}: <{tag}{f' id={ident!r}' if ident else ''}>"

    def size(self, value: str | None, ref: float, where: str, attr: str) -> float:
        """A width or height: a length, or a percentage of the viewport's ``ref``."""
        if value is not None and value.strip().endswith("%"):
            mt = _LENGTH_RE.match(value)
            if mt is None:
                raise DrawingError(f"{where}: cannot read {attr}={value!r}")
            return float(mt.group(1)) / 100.0 * ref
        if value is None or value.strip() in ("", "auto"):
            return ref
        return _length(value, ref, where, attr)

    def walk(  # noqa: C901 - one branch per SVG element kind
        self, el: Element, ctm: Matrix, layer: str, hidden: bool, depth: int,
        uses: tuple[str, ...], via: str, paint: dict[str, str],
    ) -> None:
        self.budget -= 1
        if self.budget < 0:
            raise DrawingError(
                f"{self.path}: more than {MAX_SVG_ELEMENTS} elements after expanding <use>; "
                f"the drawing is too large or its <use> references multiply without end"
            )
        ns, tag = _local(el.tag)
        if ns not in ("", _SVG_NS):
            return  # editor metadata (sodipodi, inkscape, ...)
        self.serial += 1
        style = _style(el, self.sheet)
        if style.get("display") == "none":
            self.skipped[f"{tag} (display:none)"] += 1
            return
        vis = style.get("visibility")
        if vis in ("hidden", "collapse"):
            hidden = True
        elif vis == "visible":
            hidden = False
        paint = dict(paint)
        for key in ("fill", "stroke", "fill-opacity"):
            val = style.get(key)
            if val and val != "inherit":
                paint[key] = val
        where = self.where(el, tag)
        if style.get("clip-path", "none") != "none" or style.get("mask", "none") != "none":
            self.notes.append(f"{where} has a clip-path or mask, which is not applied: "
                              f"its shapes are read whole")
        m = ctm @ parse_transform(el.get("transform"), where=where)
        if tag in ("g", "a"):
            layer = self.group_layer(el, layer, hidden, depth)
            for child in el:
                self.walk(child, m, layer, hidden, depth + 1, uses, via, paint)
        elif tag == "switch":
            layer = self.group_layer(el, layer, hidden, depth)
            chosen = self.switch_child(el)
            n_other = sum(1 for c in el if _local(c.tag)[0] in ("", _SVG_NS)) - (chosen is not None)
            if n_other:
                self.skipped["switch alternative"] += n_other
            if chosen is not None:
                self.walk(chosen, m, layer, hidden, depth + 1, uses, via, paint)
        elif tag == "svg":
            self.viewport(el, el, m, layer, hidden, depth, uses, via, paint, where,
                          el.get("width"), el.get("height"))
        elif tag == "use":
            self.use(el, m, layer, hidden, depth, uses, where, paint)
        elif tag in _SHAPES:
            if hidden:
                self.skipped[f"{tag} (visibility:hidden)"] += 1
                return
            self.add_shape(el, tag, where, m, layer, via, paint)
        elif tag in _NOT_RENDERED:
            pass
        else:
            self.skipped[tag] += 1

    def group_layer(self, el: Element, layer: str, hidden: bool, depth: int) -> str:
        if el.get(f"{_INKSCAPE}groupmode") == "layer":
            layer = el.get(f"{_INKSCAPE}label") or el.get("id") or layer
            self.layers.setdefault(layer, LayerInfo(layer, is_on=not hidden))
        elif depth == 1 and layer == "0":
            layer = el.get(f"{_INKSCAPE}label") or el.get("id") or layer
        return layer

    @staticmethod
    def switch_child(el: Element) -> Element | None:
        """The child a ``<switch>`` renders: the first whose conditions hold.

        ``requiredExtensions`` naming anything fails (no extension is
        supported), ``systemLanguage`` holds when it lists English (``en``),
        ``requiredFeatures`` always holds (SVG 2 drops it).
        """
        for child in el:
            if _local(child.tag)[0] not in ("", _SVG_NS):
                continue
            if (child.get("requiredExtensions") or "").strip():
                continue
            langs = child.get("systemLanguage")
            if langs is not None and not any(
                lang.strip().lower().split("-")[0] == "en" for lang in langs.split(",")
            ):
                continue
            return child
        return None

    def viewport(
        self, el: Element, content: Element, m: Matrix, layer: str, hidden: bool, depth: int,
        uses: tuple[str, ...], via: str, paint: dict[str, str], where: str,
        w_text: str | None, h_text: str | None, xy: tuple[float, float] | None = None,
    ) -> None:
        """Walk the children of a nested ``<svg>`` or a ``<symbol>`` in its own viewport.

        ``width``/``height`` default to 100% of the enclosing viewport (SVG 2
        ``auto``). Content outside the viewport is clipped by SVG unless
        ``overflow`` is visible; sectionwave does not clip, and says so.
        """
        pw, ph = self.viewports[-1]
        if xy is None:
            x = _length(el.get("x"), 0.0, where, "x")
            y = _length(el.get("y"), 0.0, where, "y")
        else:
            x, y = xy
        w = self.size(w_text, pw, where, "width")
        h = self.size(h_text, ph, where, "height")
        vp = np.eye(3)
        inner = (w, h)
        if w > 0 and h > 0:
            vp, vb = _viewport(el, w, h, where)
            if vb is not None:
                inner = (vb[2], vb[3])
        elif el.get("viewBox"):
            self.notes.append(f"{where} has a viewBox but no size to map it to: viewBox ignored")
        m2 = m @ _translate(x, y) @ vp
        first = len(self.shapes)
        self.viewports.append(inner)
        try:
            for child in content:
                self.walk(child, m2, layer, hidden, depth + 1, uses, via, paint)
        finally:
            self.viewports.pop()
        overflow = _style(el, self.sheet).get("overflow", "hidden")
        if w > 0 and h > 0 and overflow not in ("visible", "auto"):
            self.check_clip(first, m @ _translate(x, y), w, h, where)

    def check_clip(self, first: int, m: Matrix, w: float, h: float, where: str) -> None:
        """Note shapes that reach outside a viewport rectangle (SVG would clip them)."""
        if first >= len(self.shapes):
            return
        inv = np.linalg.inv(m)
        tol = _CLIP_TOL_REL * max(w, h)
        outside = []
        for shp in self.shapes[first:]:
            pts = np.vstack([s.points(np.linspace(0.0, 1.0, 33)) for s in shp.segs])
            loc = pts @ inv[:2, :2].T + inv[:2, 2]
            if (loc[:, 0].min() < -tol or loc[:, 1].min() < -tol
                    or loc[:, 0].max() > w + tol or loc[:, 1].max() > h + tol):
                outside.append(shp.ident)
        if outside:
            shown = ", ".join(outside[:4]) + (f" and {len(outside) - 4} more"
                                              if len(outside) > 4 else "")
            self.notes.append(
                f"{where}: {len(outside)} shape(s) reach outside the viewport ({w:g} x {h:g} "
                f"user units) that SVG clips them to ({shown}); clipping is not applied, "
                f"the shapes are read whole: crop them in the drawing if the clip matters"
            )

    def use(
        self, el: Element, m: Matrix, layer: str, hidden: bool, depth: int,
        uses: tuple[str, ...], where: str, paint: dict[str, str],
    ) -> None:
        href = el.get("href") or el.get(_XLINK_HREF) or ""
        if not href.startswith("#") or href[1:] not in self.ids:
            self.notes.append(f"{where} refers to {href!r}, which is not in the file: skipped")
            self.skipped["use (missing target)"] += 1
            return
        ref = href[1:]
        if ref in uses:
            raise DrawingError(
                f"{where}: <use> references form a loop ({' -> '.join((*uses, ref))}); "
                f"break the loop"
            )
        x = _length(el.get("x"), 0.0, where, "x")
        y = _length(el.get("y"), 0.0, where, "y")
        target = self.ids[ref]
        m2 = m @ _translate(x, y)
        via = f" via <use href='#{ref}'>"
        ttag = _local(target.tag)[1]
        if ttag in ("symbol", "svg"):
            # width/height on <use> override the symbol's (or svg's) own;
            # the <use> x/y already moved the origin.
            tstyle = _style(target, self.sheet)
            if tstyle.get("display") == "none":
                self.skipped[f"{ttag} (display:none)"] += 1
                return
            tpaint = dict(paint)
            for key in ("fill", "stroke", "fill-opacity"):
                if tstyle.get(key) and tstyle[key] != "inherit":
                    tpaint[key] = tstyle[key]
            tx = _length(target.get("x"), 0.0, where, "x") if ttag == "svg" else 0.0
            ty = _length(target.get("y"), 0.0, where, "y") if ttag == "svg" else 0.0
            m3 = m2 @ parse_transform(target.get("transform"), where=where)
            self.viewport(
                target, target, m3, layer, hidden, depth + 1, (*uses, ref), via, tpaint,
                self.where(target, ttag), el.get("width") or target.get("width"),
                el.get("height") or target.get("height"), (tx, ty),
            )
        else:
            self.walk(target, m2, layer, hidden, depth + 1, (*uses, ref), via, paint)

    def add_shape(
        self, el: Element, tag: str, where: str, m: Matrix, layer: str, via: str,
        paint: dict[str, str],
    ) -> None:
        subpaths = self.shape(el, tag, where)
        if not any(subpaths):
            self.skipped[f"empty {tag}"] += 1
            return
        fill = paint.get("fill", "black")
        try:
            opacity = float(paint.get("fill-opacity", "1").rstrip("%"))
        except ValueError:
            opacity = 1.0
        is_filled = tag != "line" and fill not in ("none", "transparent") and opacity > 0.0
        ident = el.get("id") or f"{tag}[{self.serial}]"
        if is_filled:
            # SVG fills an open subpath as if closed by a straight line.
            for k, sub in enumerate(subpaths):
                if not sub:
                    continue
                a, b = sub[0].start, sub[-1].end
                x0, y0, x1, y1 = _box(sub)
                closed = float(np.hypot(*(a - b))) <= 1e-9 * max(x1 - x0, y1 - y0)
                if not closed and not (len(sub) == 1 and isinstance(sub[0], Line)):
                    sub.append(Line(b.copy(), a.copy()))
                    if tag == "path":
                        self.notes.append(
                            f"{where}: filled subpath {k + 1} has no closing Z; closed with a "
                            f"straight line from {_fmt_pt(b)} to {_fmt_pt(a)} (user units) as "
                            f"SVG fills it"
                        )
        a_m, b_m = m[:2, :2], m[:2, 2]
        segs = [s.transformed(a_m, b_m) for sub in subpaths for s in sub]
        src = f"<{tag} id={ident!r}>{via}"
        self.shapes.append(_Shape(
            tag, ident, src, layer, segs, is_filled, fill, len(self.shapes),
            is_rect=_is_axis_rectangle(segs), box=_box(segs),
        ))
        self.counts[tag] += 1

    def shape(self, el: Element, tag: str, where: str) -> list[list[Segment]]:
        def num(name: str, default: float = 0.0) -> float:
            return _length(el.get(name), default, where, name)

        if tag == "path":
            return parse_path_data(el.get("d") or "", where=where)
        if tag == "circle":
            r = num("r")
            if r <= 0:
                return []
            center = np.array([num("cx"), num("cy")])
            return [[EllipticalArc(center, r * np.eye(2), 0.0, 2 * math.pi)]]
        if tag == "ellipse":
            # SVG 2: rx or ry 'auto' (or missing) takes the other's value; a
            # negative value is invalid and falls back to 'auto' as well.
            rx_t, ry_t = el.get("rx"), el.get("ry")
            rx = _length(rx_t, -1.0, where, "rx") if rx_t not in (None, "auto") else -1.0
            ry = _length(ry_t, -1.0, where, "ry") if ry_t not in (None, "auto") else -1.0
            if rx < 0:
                rx = ry
            elif ry < 0:
                ry = rx
            if rx <= 0 or ry <= 0:
                return []
            center = np.array([num("cx"), num("cy")])
            return [[EllipticalArc(center, np.diag([rx, ry]), 0.0, 2 * math.pi)]]
        if tag == "line":
            p0 = np.array([num("x1"), num("y1")])
            p1 = np.array([num("x2"), num("y2")])
            return [] if np.array_equal(p0, p1) else [[Line(p0, p1)]]
        if tag in ("polyline", "polygon"):
            vals = [float(v) for v in _NUMBER_RE.findall(el.get("points") or "")]
            pts = np.array(vals[: len(vals) // 2 * 2]).reshape(-1, 2)
            if tag == "polygon" and len(pts) > 2:
                pts = np.vstack([pts, pts[:1]])
            pairs = zip(pts[:-1], pts[1:], strict=True)
            return [[Line(a, b) for a, b in pairs if not np.array_equal(a, b)]]
        return [self.rect(num("x"), num("y"), num("width"), num("height"), el, where)]

    def rect(
        self, x: float, y: float, w: float, h: float, el: Element, where: str
    ) -> list[Segment]:
        if w <= 0 or h <= 0:
            return []
        rx_t, ry_t = el.get("rx"), el.get("ry")
        rx = _length(rx_t, -1.0, where, "rx") if rx_t not in (None, "auto") else -1.0
        ry = _length(ry_t, -1.0, where, "ry") if ry_t not in (None, "auto") else -1.0
        if rx < 0 and ry < 0:
            rx = ry = 0.0
        elif rx < 0:
            rx = ry
        elif ry < 0:
            ry = rx
        rx, ry = min(rx, w / 2), min(ry, h / 2)
        if rx == 0 or ry == 0:
            corners = [(x, y), (x + w, y), (x + w, y + h), (x, y + h), (x, y)]
            cs = np.array(corners)
            return [Line(a, b) for a, b in zip(cs[:-1], cs[1:], strict=True)]
        half = 0.5 * math.pi
        ax = np.diag([rx, ry])
        segs: list[Segment] = []
        plan = [
            ((x + rx, y), (x + w - rx, y), (x + w - rx, y + ry), -half),
            ((x + w, y + ry), (x + w, y + h - ry), (x + w - rx, y + h - ry), 0.0),
            ((x + w - rx, y + h), (x + rx, y + h), (x + rx, y + h - ry), half),
            ((x, y + h - ry), (x, y + ry), (x + rx, y + ry), 2 * half),
        ]
        for a, b, c, th in plan:
            if a != b:
                segs.append(Line(np.array(a), np.array(b)))
            segs.append(EllipticalArc(np.array(c), ax, th, half))
        return segs


def _expanded_count(root: Element) -> float:
    """Elements in the document once every ``<use>`` is expanded (an upper bound).

    Counted with a memo per element, so an exponential ``<use>`` bomb is
    refused before anything is built; a reference loop counts as nothing
    here (the walk reports it).
    """
    stack = [(root, 1)]
    while stack:
        el, depth = stack.pop()
        if depth > MAX_SVG_DEPTH:
            raise DrawingError(
                f"elements nested more than {MAX_SVG_DEPTH} deep (<{_local(el.tag)[1]}> at "
                f"depth {depth}); flatten the groups"
            )
        stack.extend((child, depth + 1) for child in el)
    ids: dict[str, Element] = {}
    for el in root.iter():
        ident = el.get("id")
        if ident:
            ids.setdefault(ident, el)
    memo: dict[int, float] = {}
    busy: set[int] = set()

    def count(el: Element) -> float:
        key = id(el)
        if key in memo:
            return memo[key]
        if key in busy:
            return 0.0
        busy.add(key)
        total = 1.0
        for child in el:
            total += count(child)
        if _local(el.tag)[1] == "use":
            href = el.get("href") or el.get(_XLINK_HREF) or ""
            target = ids.get(href[1:]) if href.startswith("#") else None
            if target is not None:
                total += count(target)
        busy.discard(key)
        memo[key] = total
        return total

    return count(root)


def _fmt_pt(p: Sequence[float] | NDArray[np.float64]) -> str:
    return f"({float(p[0]):.9g}, {float(p[1]):.9g})"


def _choose_by_paint(
    shapes: list[_Shape], page: tuple[float, float, float, float] | None, paint: str,
) -> tuple[list[_Shape], list[str], Counter[str]]:
    """Apply the paint rule: which shapes are outline, and why the others are left out.

    Returns the chosen shapes, one line per left-out shape (or group of
    shapes) for the notes, and counts for ``Drawing.skipped``.
    """
    if paint == "all" or not shapes:
        return list(shapes), [], Counter()
    left: list[str] = []
    counts: Counter[str] = Counter()
    chosen = list(shapes)
    # 1. Page background (paper-coloured filled rectangle) or page frame
    # (unfilled rectangle on the page edges) enclosing everything else.
    while len(chosen) > 1:
        boxes = [s.box for s in chosen]
        span = max(max(b[2] for b in boxes) - min(b[0] for b in boxes),
                   max(b[3] for b in boxes) - min(b[1] for b in boxes))
        tol = 1e-9 * span
        frame = None
        for s in chosen:
            if not s.is_rect:
                continue
            if not all(_encloses(s.box, o.box, tol) for o in chosen if o is not s):
                continue
            if s.is_filled and _is_paper(s.fill):
                frame = (s, f"filled with {s.fill}: a page background")
                break
            if not s.is_filled and page is not None:
                ptol = _PAGE_TOL_REL * max(page[2] - page[0], page[3] - page[1])
                if all(abs(u - v) <= ptol for u, v in zip(s.box, page, strict=True)):
                    frame = (s, "unfilled, on the page edges: a page frame")
                    break
        if frame is None:
            break
        shp, why = frame
        chosen = [s for s in chosen if s is not shp]
        left.append(
            f"{shp.src} ({shp.tag} enclosing every other shape, {why}); "
            f"paint='all' reads it as a body"
        )
        counts[f"{shp.tag} (page background or frame)"] += 1
    # 2. Filled shapes are bodies; unfilled ones only when nothing is filled.
    filled = [s for s in chosen if s.is_filled]
    unfilled = [s for s in chosen if not s.is_filled]
    if filled and unfilled:
        names = ", ".join(s.ident for s in unfilled[:6])
        more = f" and {len(unfilled) - 6} more" if len(unfilled) > 6 else ""
        left.append(
            f"{len(unfilled)} unfilled shape(s) ({names}{more}): the drawing has "
            f"filled shapes, and then only filled shapes are bodies (paint='all' reads "
            f"every shape)"
        )
        counts.update(f"{s.tag} (unfilled)" for s in unfilled)
        chosen = filled
    return chosen, left, counts


def read_svg(
    path: str | Path,
    *,
    units: str | float | None = None,
    layers: str | Sequence[str] | None = None,
    max_bytes: int = MAX_SVG_BYTES,
    paint: str = "auto",
) -> Drawing:
    """Read an SVG file into exact pieces, in metres, with the y axis pointing up.

    Parameters
    ----------
    path
        SVG file.
    units
        Length of one user unit (``"mm"``, ``"px"``, ... or metres). By
        default it follows from ``width``/``height`` and ``viewBox``
        (1 px = 1/96 in when they are absent).
    layers
        Layer names or globs to read (case-insensitive); by default every
        visible layer.
    max_bytes
        Larger files are refused before parsing.
    paint
        ``"auto"`` (default) applies the paint rule of the module docstring:
        filled shapes are bodies, unfilled outlines only when nothing is
        filled, and a page background or frame is left out (each named in
        :attr:`Drawing.left_out`). ``"all"`` reads every shape as outline.

    Returns
    -------
    Drawing
        The pieces; the viewBox's lower-left corner maps to y = 0.

    Raises
    ------
    DrawingError
        For unsafe XML (entity declarations, external entities), files over
        the size cap, malformed XML or path data, and drawings with no shape.
    """
    # Hostile values (1e300, 1e400) must end in the coordinate check, not in
    # numpy's overflow warnings on the way there.
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        return _read_svg(Path(path), units, layers, max_bytes, paint)


def _read_svg(  # noqa: C901 - document-level steps: size cap, parse, viewport, paint rule
    p: Path, units: str | float | None, layers: str | Sequence[str] | None, max_bytes: int,
    paint: str,
) -> Drawing:
    if paint not in PAINT_MODES:
        raise DrawingError(f"{p}: paint={paint!r} is not one of {', '.join(PAINT_MODES)}")
    if not p.is_file():
        raise DrawingError(f"{p}: no such file")
    size = p.stat().st_size
    if size > max_bytes:
        raise DrawingError(
            f"{p}: the file is {size} bytes, over the {max_bytes}-byte cap for SVG; "
            f"raise max_bytes if the drawing is genuine"
        )
    data = p.read_bytes()
    if not data.strip():
        raise DrawingError(f"{p}: the file is empty; save the drawing again")
    if data.lstrip().startswith(b"AutoCAD Binary DXF") or re.match(
        rb"\s*(999\s*\r?\n[^\n]*\n\s*)*0\s*\r?\n\s*SECTION", data[:4096]
    ):
        raise DrawingError(f"{p}: not an SVG file: it holds DXF; rename it to .dxf")
    root = _parse_xml(p, data)
    ns, tag = _local(root.tag)
    if tag != "svg":
        raise DrawingError(f"{p}: not an SVG drawing (the root element is <{tag}>, not <svg>)")
    where = f"{p}: <svg>"
    px_m = UNIT_SCALES_M["px"]
    notes: list[str] = []
    if units is not None:
        unit_name, scale = units_to_metres(units, where=str(p))
        vb = [float(v) for v in _NUMBER_RE.findall(root.get("viewBox") or "")]
        top = vb[1] + vb[3] if len(vb) == 4 else 0.0
        world = np.array([[scale, 0.0, 0.0], [0.0, -scale, scale * top], [0.0, 0.0, 1.0]])
        notes.append(f"user units taken as {unit_name} (units={units!r}); width/height ignored")
    else:
        vb = [float(v) for v in _NUMBER_RE.findall(root.get("viewBox") or "")]
        w_t, h_t = root.get("width"), root.get("height")
        if w_t and w_t.strip().endswith("%"):
            w_t = None
        if h_t and h_t.strip().endswith("%"):
            h_t = None
        vw, vh = (vb[2], vb[3]) if len(vb) == 4 else (0.0, 0.0)
        # Sizes straight to metres (1 mm is 0.001 m exactly, not 96/25.4 px).
        w = _length_m(w_t, -1.0, where, "width")
        h = _length_m(h_t, -1.0, where, "height")
        if w < 0 and h < 0:
            w, h = vw * px_m, vh * px_m
        elif w < 0:
            w = h * vw / vh if vh else 0.0
        elif h < 0:
            h = w * vh / vw if vw else 0.0
        if len(vb) == 4 and w > 0 and h > 0:
            vp, _ = _viewport(root, w, h, where)
        else:
            vp = np.diag([px_m, px_m, 1.0])
            h = max(h, 0.0)
        # Flip y so it points up, with the viewport's bottom edge at y = 0.
        world = np.array([[1.0, 0.0, 0.0], [0.0, -1.0, h], [0.0, 0.0, 1.0]]) @ vp
        s = float(math.hypot(world[0, 0], world[1, 0]))
        unit_name, scale = "px", s
        for name, val in UNIT_SCALES_M.items():
            if math.isclose(val, s, rel_tol=1e-12):
                unit_name = name
                break
        else:
            unit_name = f"{s:g} m"
    # the root viewport: size in user units (percentages of nested ones refer
    # to it) and the page rectangle in the world frame (for page frames)
    if len(vb) == 4 and vb[2] > 0 and vb[3] > 0:
        root_box = (vb[0], vb[1], vb[0] + vb[2], vb[1] + vb[3])
    else:
        w_px = _length(root.get("width"), 0.0, where, "width") if not (
            root.get("width") or "").strip().endswith("%") else 0.0
        h_px = _length(root.get("height"), 0.0, where, "height") if not (
            root.get("height") or "").strip().endswith("%") else 0.0
        root_box = (0.0, 0.0, w_px, h_px)
    page: tuple[float, float, float, float] | None = None
    if root_box[2] > root_box[0] and root_box[3] > root_box[1]:
        corners = np.array([[root_box[0], root_box[1], 1.0], [root_box[2], root_box[3], 1.0]])
        wc = corners @ world.T
        page = (float(wc[:, 0].min()), float(wc[:, 1].min()),
                float(wc[:, 0].max()), float(wc[:, 1].max()))
    try:
        total = _expanded_count(root)
    except DrawingError as exc:
        raise DrawingError(f"{p}: {exc}") from None
    if total > MAX_SVG_ELEMENTS:
        raise DrawingError(
            f"{p}: more than {MAX_SVG_ELEMENTS} elements after expanding <use> (about "
            f"{total:.3g}); the drawing is too large or its <use> references multiply "
            f"without end (a reference bomb)"
        )
    walker = _Walker(p, root)
    walker.notes = notes
    if walker.sheet.skipped_rules:
        notes.append(
            f"{walker.sheet.skipped_rules} CSS rule(s) or selector(s) in <style> were not "
            f"applied (only tag, *, .class and #id selectors are): check the paint of "
            f"the shapes they style"
        )
    walker.viewports = [(root_box[2] - root_box[0], root_box[3] - root_box[1])]
    for child in root:
        walker.walk(child, world, "0", False, 1, (), "", {})
    layer_info = dict(walker.layers)
    skipped = walker.skipped
    found: list[tuple[Piece, str]] = []
    owner: dict[int, int] = {}
    for k, shp in enumerate(walker.shapes):
        for seg in shp.segs:
            pc = Piece(seg, shp.layer, shp.ident, shp.src)
            owner[id(pc)] = k
            found.append((pc, seg.kind))
    selected = select_pieces(found, layers, layer_info, skipped, str(p))
    on_layer = sorted({owner[id(pc)] for pc in selected})
    chosen, left_out, left_counts = _choose_by_paint(
        [walker.shapes[k] for k in on_layer], page, paint
    )
    keep = {id(s) for s in chosen}
    pieces = [pc for pc in selected if id(walker.shapes[owner[id(pc)]]) in keep]
    skipped.update(left_counts)
    check_coordinates(pieces, str(p))
    if not pieces:
        what = ", ".join(f"{n} {k}" for k, n in sorted(skipped.items())) or "nothing"
        raise DrawingError(
            f"{p}: no closed outline: the SVG holds no visible shape (found {what}); "
            f"draw the cross-section with path, rect, circle, ellipse, polygon or polyline"
        )
    return Drawing(
        pieces=pieces,
        path=p,
        format="svg",
        units=unit_name,
        scale_to_m=scale,
        layers=layer_info,
        entity_counts=walker.counts,
        skipped=Counter({k: v for k, v in skipped.items() if v}),
        notes=walker.notes,
        left_out=left_out,
    )
