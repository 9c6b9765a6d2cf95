"""Exact curve segments and closed contours.

Glossary
--------
segment
    One exact piece of an outline, parametrised by ``t`` in [0, 1]: a line,
    an elliptical (or circular) arc, a Bezier curve of any degree, or a
    (rational) B-spline. Positions, first and second derivatives are exact.
contour
    A closed chain of segments, each ending where the next starts.
orientation
    Outer boundaries run counter-clockwise and holes clockwise, so the body
    always lies to the left of the direction of travel and the unit normal,
    the tangent turned clockwise by 90 degrees, points out of the body.
curvature
    Signed: positive where the contour turns left (convex part of an outer
    boundary), ``kappa = (x' y'' - y' x'') / |r'|^3``.

All coordinates are metres once a drawing has been imported; the classes
themselves are unit-free.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import GeometryError

__all__ = [
    "BSpline",
    "Bezier",
    "Body",
    "Contour",
    "EllipticalArc",
    "Line",
    "Segment",
    "circular_arc",
]

FloatArray = NDArray[np.float64]

#: Joints whose tangent directions differ by more than this (radians) are corners.
CORNER_ANGLE_RAD = 1e-7
#: Points per segment of the polygons behind point-in-body and overlap tests.
CONTAINS_SAMPLES = 1024

_GL_X, _GL_W = np.polynomial.legendre.leggauss(24)
_GL_T = 0.5 * (_GL_X + 1.0)
_GL_WT = 0.5 * _GL_W


def _as_t(t: ArrayLike) -> FloatArray:
    return np.atleast_1d(np.asarray(t, dtype=float))


class Segment(ABC):
    """One exact piece of a contour, parametrised by ``t`` in [0, 1]."""

    kind: str = "segment"

    @abstractmethod
    def points(self, t: ArrayLike) -> FloatArray:
        """Positions, shape ``(n, 2)``."""

    @abstractmethod
    def derivative(self, t: ArrayLike) -> FloatArray:
        """First derivative with respect to ``t``, shape ``(n, 2)``."""

    @abstractmethod
    def second_derivative(self, t: ArrayLike) -> FloatArray:
        """Second derivative with respect to ``t``, shape ``(n, 2)``."""

    @abstractmethod
    def reversed(self) -> Segment:
        """Return the same curve traversed the other way."""

    @abstractmethod
    def transformed(self, matrix: ArrayLike, offset: ArrayLike = (0.0, 0.0)) -> Segment:
        """Return the exact image under ``x -> matrix @ x + offset``."""

    def subdivision_hints(self) -> FloatArray:
        """Parameters where the curve should be split before meshing.

        Knots of a B-spline, quarter turns of an arc: places where the
        parametrisation changes character. Always holds 0 and 1.
        """
        return np.array([0.0, 1.0])

    @property
    def start(self) -> FloatArray:
        """First point."""
        return self.points(0.0)[0]

    @property
    def end(self) -> FloatArray:
        """Last point."""
        return self.points(1.0)[0]

    def length(self) -> float:
        """Arc length, by composite Gauss-Legendre quadrature (exact to rounding)."""
        hints = self.subdivision_hints()
        total = 0.0
        for a, b in zip(hints[:-1], hints[1:], strict=True):
            for lo, hi in _split(a, b, 8):
                t = lo + (hi - lo) * _GL_T
                speed = np.hypot(*self.derivative(t).T)
                total += (hi - lo) * float(np.dot(_GL_WT, speed))
        return float(total)

    def area_integral(self) -> float:
        """Integrate ``(x dy - y dx) / 2`` along the segment.

        Summed over a closed contour this is its signed area.
        """
        hints = self.subdivision_hints()
        total = 0.0
        for a, b in zip(hints[:-1], hints[1:], strict=True):
            for lo, hi in _split(a, b, 8):
                t = lo + (hi - lo) * _GL_T
                p = self.points(t)
                d = self.derivative(t)
                f = 0.5 * (p[:, 0] * d[:, 1] - p[:, 1] * d[:, 0])
                total += (hi - lo) * float(np.dot(_GL_WT, f))
        return float(total)

    def tangent(self, t: ArrayLike) -> FloatArray:
        """Return the unit tangent, shape ``(n, 2)``."""
        d = self.derivative(t)
        return d / np.hypot(d[:, 0], d[:, 1])[:, None]

    def normal(self, t: ArrayLike) -> FloatArray:
        """Return the unit normal: the tangent turned clockwise (out of the body)."""
        tan = self.tangent(t)
        return np.column_stack([tan[:, 1], -tan[:, 0]])

    def curvature(self, t: ArrayLike) -> FloatArray:
        """Signed curvature, positive where the curve turns left."""
        d = self.derivative(t)
        dd = self.second_derivative(t)
        speed = np.hypot(d[:, 0], d[:, 1])
        return (d[:, 0] * dd[:, 1] - d[:, 1] * dd[:, 0]) / speed**3


def _split(a: float, b: float, n: int) -> list[tuple[float, float]]:
    edges = np.linspace(a, b, n + 1)
    return list(zip(edges[:-1], edges[1:], strict=True))


def _matrix(matrix: ArrayLike) -> FloatArray:
    m = np.asarray(matrix, dtype=float)
    if m.shape != (2, 2):
        raise GeometryError(f"a transform matrix must be 2 x 2, got shape {m.shape}")
    return m


@dataclass(frozen=True, eq=False)
class Line(Segment):
    """Straight segment from ``p0`` to ``p1``."""

    p0: FloatArray
    p1: FloatArray
    kind: str = field(default="line", init=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "p0", np.asarray(self.p0, dtype=float).reshape(2))
        object.__setattr__(self, "p1", np.asarray(self.p1, dtype=float).reshape(2))

    def points(self, t: ArrayLike) -> FloatArray:
        tt = _as_t(t)[:, None]
        return self.p0 + tt * (self.p1 - self.p0)

    def derivative(self, t: ArrayLike) -> FloatArray:
        return np.tile(self.p1 - self.p0, (_as_t(t).size, 1))

    def second_derivative(self, t: ArrayLike) -> FloatArray:
        return np.zeros((_as_t(t).size, 2))

    def reversed(self) -> Line:
        return Line(self.p1, self.p0)

    def transformed(self, matrix: ArrayLike, offset: ArrayLike = (0.0, 0.0)) -> Line:
        m, b = _matrix(matrix), np.asarray(offset, dtype=float)
        return Line(m @ self.p0 + b, m @ self.p1 + b)

    def length(self) -> float:
        return float(np.hypot(*(self.p1 - self.p0)))

    def area_integral(self) -> float:
        # closed form of the integral of (x dy - y dx) / 2 along a straight line
        (x0, y0), (x1, y1) = self.p0, self.p1
        return 0.5 * float(x0 * y1 - x1 * y0)


@dataclass(frozen=True, eq=False)
class EllipticalArc(Segment):
    """Arc of the ellipse ``center + axes @ (cos theta, sin theta)``.

    ``theta = theta0 + sweep * t``; ``axes`` is any non-singular 2 x 2
    matrix, so an affine image of an arc is again an ``EllipticalArc``
    (exactly, with no refit). A circle of radius r is ``axes = r I``.
    """

    center: FloatArray
    axes: FloatArray
    theta0: float
    sweep: float

    def __post_init__(self) -> None:
        object.__setattr__(self, "center", np.asarray(self.center, dtype=float).reshape(2))
        object.__setattr__(self, "axes", _matrix(self.axes))
        if abs(np.linalg.det(self.axes)) == 0.0 or self.sweep == 0.0:
            raise GeometryError("an elliptical arc needs non-zero axes and sweep")

    @property
    def kind(self) -> str:  # type: ignore[override]
        m = self.axes
        is_circle = np.allclose(m.T @ m, abs(np.linalg.det(m)) * np.eye(2), rtol=1e-12, atol=0)
        return "arc" if is_circle else "elliptical_arc"

    def _theta(self, t: ArrayLike) -> FloatArray:
        return self.theta0 + self.sweep * _as_t(t)

    def points(self, t: ArrayLike) -> FloatArray:
        th = self._theta(t)
        return self.center + np.column_stack([np.cos(th), np.sin(th)]) @ self.axes.T

    def derivative(self, t: ArrayLike) -> FloatArray:
        th = self._theta(t)
        return self.sweep * np.column_stack([-np.sin(th), np.cos(th)]) @ self.axes.T

    def second_derivative(self, t: ArrayLike) -> FloatArray:
        th = self._theta(t)
        return -(self.sweep**2) * np.column_stack([np.cos(th), np.sin(th)]) @ self.axes.T

    def reversed(self) -> EllipticalArc:
        return EllipticalArc(self.center, self.axes, self.theta0 + self.sweep, -self.sweep)

    def transformed(self, matrix: ArrayLike, offset: ArrayLike = (0.0, 0.0)) -> EllipticalArc:
        m, b = _matrix(matrix), np.asarray(offset, dtype=float)
        return EllipticalArc(m @ self.center + b, m @ self.axes, self.theta0, self.sweep)

    def area_integral(self) -> float:
        # With p = c + A u(theta): x dy - y dx = c x (A u') + det(A) (u x u'), and
        # u x u' = 1, so the integral is closed form (exact for any axes matrix).
        th1 = self.theta0 + self.sweep
        th0 = self.theta0
        du = np.array([math.cos(th1) - math.cos(th0), math.sin(th1) - math.sin(th0)])
        w = self.axes @ du
        c = self.center
        return 0.5 * float(c[0] * w[1] - c[1] * w[0] + np.linalg.det(self.axes) * self.sweep)

    def subdivision_hints(self) -> FloatArray:
        n = max(1, math.ceil(abs(self.sweep) / (0.5 * math.pi) - 1e-9))
        return np.linspace(0.0, 1.0, n + 1)


def circular_arc(
    center: ArrayLike, radius: float, start_angle: float, sweep: float
) -> EllipticalArc:
    """Circular arc; angles in radians, ``sweep > 0`` counter-clockwise.

    Examples
    --------
    >>> arc = circular_arc((0.0, 0.0), 2.0, 0.0, 2 * math.pi)
    >>> round(arc.length() / math.pi, 12)
    4.0
    """
    if not radius > 0:
        raise GeometryError(f"an arc radius must be positive, got {radius!r}")
    return EllipticalArc(np.asarray(center, dtype=float), radius * np.eye(2), start_angle, sweep)


@dataclass(frozen=True, eq=False)
class Bezier(Segment):
    """Bezier curve of any degree through its control points ``(n + 1, 2)``."""

    control: FloatArray

    def __post_init__(self) -> None:
        c = np.asarray(self.control, dtype=float)
        if c.ndim != 2 or c.shape[1] != 2 or c.shape[0] < 2:
            raise GeometryError(f"a Bezier curve needs at least 2 points, got shape {c.shape}")
        object.__setattr__(self, "control", c)

    @property
    def kind(self) -> str:  # type: ignore[override]
        return {2: "line", 3: "quadratic_bezier", 4: "cubic_bezier"}.get(
            self.control.shape[0], "bezier"
        )

    @staticmethod
    def _eval(ctrl: FloatArray, t: FloatArray) -> FloatArray:
        n = ctrl.shape[0] - 1
        if n < 0:
            return np.zeros((t.size, 2))
        k = np.arange(n + 1)
        binom = np.array([math.comb(n, int(i)) for i in k], dtype=float)
        basis = binom * t[:, None] ** k * (1.0 - t[:, None]) ** (n - k)
        return basis @ ctrl

    def points(self, t: ArrayLike) -> FloatArray:
        return self._eval(self.control, _as_t(t))

    def derivative(self, t: ArrayLike) -> FloatArray:
        n = self.control.shape[0] - 1
        return n * self._eval(np.diff(self.control, axis=0), _as_t(t))

    def second_derivative(self, t: ArrayLike) -> FloatArray:
        n = self.control.shape[0] - 1
        if n < 2:
            return np.zeros((_as_t(t).size, 2))
        return n * (n - 1) * self._eval(np.diff(self.control, n=2, axis=0), _as_t(t))

    def reversed(self) -> Bezier:
        return Bezier(self.control[::-1].copy())

    def transformed(self, matrix: ArrayLike, offset: ArrayLike = (0.0, 0.0)) -> Bezier:
        m, b = _matrix(matrix), np.asarray(offset, dtype=float)
        return Bezier(self.control @ m.T + b)


def _knot_runs(knots: FloatArray, lo: float, hi: float) -> list[tuple[int, int]]:
    """``(first index, multiplicity)`` of each distinct knot strictly inside ``(lo, hi)``."""
    runs: list[tuple[int, int]] = []
    i = 0
    while i < knots.size:
        j = i
        while j + 1 < knots.size and knots[j + 1] == knots[i]:
            j += 1
        if lo < knots[i] < hi:
            runs.append((i, j - i + 1))
        i = j + 1
    return runs


@dataclass(frozen=True, eq=False)
class BSpline(Segment):
    """(Rational) B-spline: ``knots``, ``control (n, 2)``, optional ``weights``.

    Evaluated exactly with scipy's de Boor implementation; the curve
    parameter ``t`` in [0, 1] maps linearly onto the knot span.

    Notes
    -----
    CAD programs store circles, arcs and chains of Bezier pieces as NURBS
    whose interior knots repeat ``degree`` times. At such a knot the curve
    is only continuous (C0): it may turn a corner there, and its second
    derivative does not exist. The curve is therefore evaluated piece by
    piece between these *joints* (one-sided derivatives at a joint, from the
    piece that starts there), :meth:`subdivision_hints` always holds them,
    and :meth:`split_at_joints` returns the pieces as separate segments so
    that a contour sees each joint (and any corner) between two segments.
    A knot repeated ``degree + 1`` times breaks the curve; the pieces are
    then returned as they are and the gap is left to the cleaning step.
    """

    knots: FloatArray
    control: FloatArray
    degree: int
    weights: FloatArray | None = None

    def __post_init__(self) -> None:
        from scipy.interpolate import BSpline as _Spl

        knots = np.asarray(self.knots, dtype=float)
        ctrl = np.asarray(self.control, dtype=float)
        p = int(self.degree)
        if p < 1:
            raise GeometryError(f"a B-spline needs degree 1 or more, got {self.degree!r}")
        if ctrl.ndim != 2 or ctrl.shape[1] != 2 or ctrl.shape[0] < p + 1:
            raise GeometryError(
                f"B-spline control points must be (n, 2) with n > degree, got {ctrl.shape}"
            )
        if knots.size != ctrl.shape[0] + p + 1:
            raise GeometryError(
                f"B-spline of degree {p} with {ctrl.shape[0]} control points "
                f"needs {ctrl.shape[0] + p + 1} knots, got {knots.size}"
            )
        if not (np.all(np.isfinite(knots)) and np.all(np.isfinite(ctrl))):
            raise GeometryError("B-spline knots and control points must be finite numbers")
        if np.any(np.diff(knots) < 0):
            raise GeometryError("B-spline knots must not decrease")
        w = None if self.weights is None else np.asarray(self.weights, dtype=float)
        if w is not None and (
            w.shape != (ctrl.shape[0],) or not np.all(np.isfinite(w)) or np.any(w <= 0)
        ):
            raise GeometryError("B-spline weights must be positive, one per control point")
        lo, hi = float(knots[p]), float(knots[-p - 1])
        if not hi > lo:
            raise GeometryError("B-spline knot span is empty (all active knots are equal)")
        object.__setattr__(self, "knots", knots)
        object.__setattr__(self, "control", ctrl)
        object.__setattr__(self, "degree", p)
        object.__setattr__(self, "weights", w)
        object.__setattr__(self, "_span", (lo, hi))
        # Split the knot vector at C0 joints (multiplicity >= degree) so that
        # every piece is twice differentiable on its open span.
        ww = np.ones(ctrl.shape[0]) if w is None else w
        parts = []
        for k_i, c_i, w_i in _split_knots(knots, ctrl, ww, p):
            num = _Spl(k_i, c_i * w_i[:, None], p, extrapolate=True)
            den = _Spl(k_i, w_i, p, extrapolate=True)
            parts.append((
                float(k_i[p]), float(k_i[-p - 1]),
                (num, num.derivative(1), num.derivative(2) if p >= 2 else None),
                (den, den.derivative(1), den.derivative(2) if p >= 2 else None),
            ))
        object.__setattr__(self, "_parts_list", parts)
        object.__setattr__(self, "_breaks", np.array([q[0] for q in parts[1:]]))

    kind: str = field(default="bspline", init=False)

    def _u(self, t: ArrayLike) -> FloatArray:
        lo, hi = self._span  # type: ignore[attr-defined]
        u = lo + (hi - lo) * _as_t(t)
        return np.clip(u, lo, hi)

    def _scale(self) -> float:
        lo, hi = self._span  # type: ignore[attr-defined]
        return hi - lo

    def _parts(self, t: ArrayLike, order: int) -> list[FloatArray]:
        u = self._u(t)
        parts = self._parts_list  # type: ignore[attr-defined]
        # piece k covers [break_{k-1}, break_k); a joint belongs to the piece it starts
        breaks: FloatArray = self._breaks  # type: ignore[attr-defined]
        which = np.searchsorted(breaks, u, side="right")
        num_out = [np.zeros((u.size, 2)) for _ in range(order + 1)]
        den_out = [np.ones((u.size, 1)) if d == 0 else np.zeros((u.size, 1))
                   for d in range(order + 1)]
        for k in np.unique(which).tolist():
            sel = which == k
            a, b, num, den = parts[k]
            uk = np.clip(u[sel], a, b)
            for d in range(order + 1):
                if num[d] is None:  # degree 1: the second derivative is zero
                    num_out[d][sel] = 0.0
                    den_out[d][sel] = 0.0
                    continue
                num_out[d][sel] = np.asarray(num[d](uk)).reshape(-1, 2)
                den_out[d][sel] = np.asarray(den[d](uk)).reshape(-1, 1)
        return num_out + den_out

    def points(self, t: ArrayLike) -> FloatArray:
        n0, d0 = self._parts(t, 0)
        return n0 / d0

    def derivative(self, t: ArrayLike) -> FloatArray:
        n0, n1, d0, d1 = self._parts(t, 1)
        return self._scale() * (n1 * d0 - n0 * d1) / d0**2

    def second_derivative(self, t: ArrayLike) -> FloatArray:
        n0, n1, n2, d0, d1, d2 = self._parts(t, 2)
        c = n0 / d0
        c1 = (n1 - c * d1) / d0
        c2 = (n2 - 2.0 * c1 * d1 - c * d2) / d0
        return self._scale() ** 2 * c2

    def reversed(self) -> BSpline:
        k = self.knots
        return BSpline(
            (k[0] + k[-1]) - k[::-1],
            self.control[::-1].copy(),
            self.degree,
            None if self.weights is None else self.weights[::-1].copy(),
        )

    def transformed(self, matrix: ArrayLike, offset: ArrayLike = (0.0, 0.0)) -> BSpline:
        # Affine maps commute with (rational) B-spline evaluation: transform
        # the control points and keep knots and weights.
        m, b = _matrix(matrix), np.asarray(offset, dtype=float)
        return BSpline(self.knots, self.control @ m.T + b, self.degree, self.weights)

    def subdivision_hints(self) -> FloatArray:
        lo, hi = self._span  # type: ignore[attr-defined]
        inner = np.unique(self.knots[(self.knots > lo) & (self.knots < hi)])
        return np.concatenate([[0.0], (inner - lo) / (hi - lo), [1.0]])

    def joints(self) -> FloatArray:
        """Curve parameters ``t`` of the C0 joints (interior knots of multiplicity >= degree)."""
        lo, hi = self._span  # type: ignore[attr-defined]
        breaks: FloatArray = self._breaks  # type: ignore[attr-defined]
        return (breaks - lo) / (hi - lo)

    def split_at_joints(self) -> tuple[BSpline, ...]:
        """The curve as separate B-splines, cut at every C0 joint.

        Returns
        -------
        tuple of BSpline
            ``(self,)`` when the curve has no joint; otherwise the pieces in
            order, each with clamped end knots, together tracing the same
            curve with the same parametrisation up to scaling.

        Examples
        --------
        Two quadratic Bezier pieces meeting at a right angle:

        >>> ctrl = [(0, 0), (1, 0), (2, 0), (2, 1), (2, 2)]
        >>> spl = BSpline([0, 0, 0, 1, 1, 2, 2, 2], ctrl, 2)
        >>> [tuple(float(v) for v in s.end) for s in spl.split_at_joints()]
        [(2.0, 0.0), (2.0, 2.0)]
        """
        if not len(self._breaks):  # type: ignore[attr-defined]
            return (self,)
        ww = np.ones(self.control.shape[0]) if self.weights is None else self.weights
        return tuple(
            BSpline(k, c, self.degree, None if self.weights is None else w_)
            for k, c, w_ in _split_knots(self.knots, self.control, ww, self.degree)
        )


def _split_knots(
    knots: FloatArray, ctrl: FloatArray, weights: FloatArray, p: int
) -> list[tuple[FloatArray, FloatArray, FloatArray]]:
    """Cut a B-spline's data at its interior knots of multiplicity >= ``p``.

    At a knot ``u`` first found at index ``j`` and repeated ``m >= p`` times,
    the left piece keeps ``knots[:j]`` plus ``u`` repeated ``p + 1`` times and
    the control points ``[:j]``; the right piece starts with ``u`` repeated
    ``p + 1`` times, then ``knots[j + m:]``, and the control points from
    ``j + m - p - 1`` on. For ``m = p`` both share control point ``j - 1``, the
    curve point at ``u`` (the B-spline basis at a knot of multiplicity ``p``
    is 1 on that control point alone).
    """
    lo, hi = float(knots[p]), float(knots[-p - 1])
    out: list[tuple[FloatArray, FloatArray, FloatArray]] = []
    k_rest, c_rest, w_rest = knots, ctrl, weights
    for j0, m in _knot_runs(knots, lo, hi):
        if m < p:
            continue
        # indices relative to the remaining (right) part
        shift = knots.size - k_rest.size
        j = j0 - shift
        u = float(k_rest[j])
        c_shift = ctrl.shape[0] - c_rest.shape[0]
        jc = j0 - c_shift
        out.append((
            np.concatenate([k_rest[:j], np.full(p + 1, u)]),
            c_rest[:jc], w_rest[:jc],
        ))
        k_rest = np.concatenate([np.full(p + 1, u), k_rest[j + m:]])
        c_rest, w_rest = c_rest[jc + m - p - 1:], w_rest[jc + m - p - 1:]
    out.append((k_rest, c_rest, w_rest))
    return out


@dataclass(frozen=True, eq=False)
class Contour:
    """Closed chain of exact segments.

    ``source`` records where the contour came from (layer, entity handles,
    element id) for messages; it does not affect the geometry.
    """

    segments: tuple[Segment, ...]
    source: str = ""

    def __post_init__(self) -> None:
        segs = tuple(self.segments)
        if not segs:
            raise GeometryError(f"a contour needs at least one segment ({self.source})")
        object.__setattr__(self, "segments", segs)

    def check_closed(self, tol: float) -> None:
        """Raise ``GeometryError`` if consecutive segments do not meet within ``tol``."""
        for i, seg in enumerate(self.segments):
            nxt = self.segments[(i + 1) % len(self.segments)]
            gap = float(np.hypot(*(seg.end - nxt.start)))
            if gap > tol:
                x, y = seg.end
                raise GeometryError(
                    f"contour {self.source or '(unnamed)'} is open: segment {i} ends at "
                    f"({x:.9g}, {y:.9g}) but segment {(i + 1) % len(self.segments)} starts "
                    f"{gap:.3g} m away; close the outline or raise the gap tolerance"
                )

    def signed_area(self) -> float:
        """Signed area: positive for counter-clockwise contours."""
        return float(sum(s.area_integral() for s in self.segments))

    def perimeter(self) -> float:
        """Total length."""
        return float(sum(s.length() for s in self.segments))

    @property
    def is_ccw(self) -> bool:
        """True when the contour runs counter-clockwise."""
        return self.signed_area() > 0.0

    def reversed(self) -> Contour:
        """Return the same contour traversed the other way."""
        return Contour(tuple(s.reversed() for s in reversed(self.segments)), self.source)

    def oriented(self, ccw: bool) -> Contour:
        """Return this contour, reversed if needed to run counter-clockwise (or clockwise)."""
        return self if self.is_ccw == ccw else self.reversed()

    def transformed(self, matrix: ArrayLike, offset: ArrayLike = (0.0, 0.0)) -> Contour:
        """Exact affine image; a reflection reverses the orientation."""
        return Contour(tuple(s.transformed(matrix, offset) for s in self.segments), self.source)

    def corner_flags(self) -> NDArray[np.bool_]:
        """``flags[i]`` is True when the joint at the start of segment ``i`` is a corner."""
        flags = np.zeros(len(self.segments), dtype=bool)
        for i, seg in enumerate(self.segments):
            prev = self.segments[i - 1]
            t_in = prev.tangent(1.0)[0]
            t_out = seg.tangent(0.0)[0]
            cross = t_in[0] * t_out[1] - t_in[1] * t_out[0]
            angle = abs(math.atan2(cross, float(np.dot(t_in, t_out))))
            flags[i] = angle > CORNER_ANGLE_RAD
        return flags

    def sample(self, per_segment: int = 32) -> FloatArray:
        """Points along the contour (for plots and point-in-body tests)."""
        t = np.linspace(0.0, 1.0, per_segment, endpoint=False)
        return np.vstack([s.points(t) for s in self.segments])

    def bounding_box(self) -> tuple[float, float, float, float]:
        """``(xmin, ymin, xmax, ymax)`` from a dense sample (arcs included)."""
        p = self.sample(256)
        lo, hi = p.min(axis=0), p.max(axis=0)
        return (float(lo[0]), float(lo[1]), float(hi[0]), float(hi[1]))


@dataclass(frozen=True, eq=False)
class Body:
    """A solid region: one outer contour (counter-clockwise) and its holes (clockwise)."""

    outer: Contour
    holes: tuple[Contour, ...] = ()
    name: str = ""

    def __post_init__(self) -> None:
        object.__setattr__(self, "outer", self.outer.oriented(ccw=True))
        object.__setattr__(self, "holes", tuple(h.oriented(ccw=False) for h in self.holes))

    @property
    def contours(self) -> tuple[Contour, ...]:
        """Outer contour first, then the holes."""
        return (self.outer, *self.holes)

    def area(self) -> float:
        """Area of the solid (outer minus holes)."""
        return float(sum(c.signed_area() for c in self.contours))

    def perimeter(self) -> float:
        """Total boundary length, holes included."""
        return float(sum(c.perimeter() for c in self.contours))

    def transformed(self, matrix: ArrayLike, offset: ArrayLike = (0.0, 0.0)) -> Body:
        """Exact affine image (orientation restored after a reflection)."""
        return Body(
            self.outer.transformed(matrix, offset),
            tuple(h.transformed(matrix, offset) for h in self.holes),
            self.name,
        )

    def contains(self, points: ArrayLike) -> NDArray[np.bool_]:
        """Tell which points lie inside the solid (not in a hole); boundary is ambiguous."""
        from matplotlib.path import Path

        pts = np.asarray(points, dtype=float).reshape(-1, 2)
        # 1024 points per segment: a curved outline is missed by at most 5e-6 of its radius.
        inside = Path(self.outer.sample(CONTAINS_SAMPLES)).contains_points(pts)
        for h in self.holes:
            inside &= ~Path(h.sample(CONTAINS_SAMPLES)).contains_points(pts)
        return inside


def polygon_segments(points: Sequence[Sequence[float]]) -> tuple[Line, ...]:
    """Lines joining consecutive points, closing back to the first one."""
    pts = np.asarray(points, dtype=float)
    return tuple(Line(pts[i], pts[(i + 1) % len(pts)]) for i in range(len(pts)))
