"""Which region lies on each side of each contour: nesting from the geometry.

Glossary
--------
region
    A connected part of the plane filled with one medium: region 0 is the
    unbounded surrounding medium (the only one with incident waves); each
    penetrable body adds its interior (filled with its material) and one
    region per hole (filled with the surrounding medium again).
container
    The region a body's outer contour lies in: the unbounded region, or
    the interior or a hole of the innermost penetrable body around it.
contour sides
    Every meshed contour separates exactly two regions: ``outside`` (where
    its normal points) and ``inside`` (behind it; None for impenetrable
    bodies, whose closed cavities are not meshed).
"""

from __future__ import annotations

from dataclasses import dataclass

from sectionwave.importers.curves import Contour

from .problem import Problem, ProblemError

__all__ = ["Layout", "MeshedContour", "RegionInfo", "check_corner_contrast", "corner_angles", "scene_layout"]


@dataclass(frozen=True)
class MeshedContour:
    """One contour to mesh: its body, the regions on both sides, and whether it is a hole."""

    contour: Contour
    body: int
    outside: int
    inside: int | None
    is_hole: bool = False


@dataclass(frozen=True)
class RegionInfo:
    """A region and what fills it.

    ``body`` is the penetrable body whose material fills it (None: the
    surrounding medium); ``owner`` the penetrable body whose interior or
    hole it is (None for the unbounded region).
    """

    body: int | None
    is_unbounded: bool = False
    owner: int | None = None


@dataclass(frozen=True)
class Layout:
    """Regions and meshed contours of a problem (frequency-independent)."""

    regions: tuple[RegionInfo, ...]
    contours: tuple[MeshedContour, ...]

    @property
    def is_simple(self) -> bool:
        """True when every body is impenetrable and lies in the surrounding medium."""
        return len(self.regions) == 1

    def exterior_contours(self) -> list[int]:
        """Indices of the contours that bound the unbounded region."""
        return [i for i, c in enumerate(self.contours) if c.outside == 0]

    def bodies_outside_in(self) -> list[int]:
        """Body indices ordered so that every container comes before what it holds."""
        outer = {c.body: c.outside for c in self.contours if not c.is_hole}

        def depth(body: int) -> int:
            owner = self.regions[outer[body]].owner
            return 0 if owner is None else 1 + depth(owner)

        return sorted(outer, key=depth)

    def region_contours(self, region: int) -> tuple[tuple[int, int], ...]:
        """The region's contours with their signs (+1: normal points into the region)."""
        out = []
        for i, c in enumerate(self.contours):
            if c.outside == region:
                out.append((i, 1))
            elif c.inside == region:
                out.append((i, -1))
        return tuple(out)


def corner_angles(contour: Contour) -> list[tuple[tuple[float, float], float]]:
    """``(point, angle)`` of every corner, the angle measured inside the body (radians).

    The body lies to the left of the direction of travel (outer contours
    counter-clockwise, holes clockwise), so the inside angle is ``pi``
    minus the signed turn of the tangent at the joint.
    """
    import math

    out = []
    flags = contour.corner_flags()
    for i, seg in enumerate(contour.segments):
        if not flags[i]:
            continue
        t_in = contour.segments[i - 1].tangent(1.0)[0]
        t_out = seg.tangent(0.0)[0]
        turn = math.atan2(t_in[0] * t_out[1] - t_in[1] * t_out[0], float(t_in @ t_out))
        p = seg.start
        out.append(((float(p[0]), float(p[1])), math.pi - turn))
    return out


def check_corner_contrast(layout: Layout, betas: list[complex], names: list[str]) -> None:
    """Refuse a corner whose flux-coefficient contrast makes the problem ill-posed.

    With ``kappa = beta_in / beta_out`` real and negative (plasmonic or
    metamaterial media), a corner of inside angle ``theta`` admits
    infinitely oscillating fields and no unique solution when
    ``-b <= kappa <= -1/b``, ``b = max(theta, 2 pi - theta) / min(...)``
    (for a right angle, ``-3 <= eps_r <= -1/3``; Bonnet-Ben Dhia, Chesnel
    and Ciarlet, and DESIGN.md). Real parts are compared; losses smooth the
    singularity but do not make the discretised problem trustworthy.

    Raises
    ------
    ProblemError
        Naming the body, the corner and the contrast.
    """
    import math

    for c in layout.contours:
        if c.inside is None:
            continue
        kappa = complex(betas[c.inside] / betas[c.outside])
        if kappa.real >= 0:
            continue
        for (x, y), theta in corner_angles(c.contour):
            small = min(theta, 2 * math.pi - theta)
            b = max(theta, 2 * math.pi - theta) / max(small, 1e-12)
            if -b <= kappa.real <= -1.0 / b:
                raise ProblemError(
                    f"body {names[c.body]!r}: the corner at ({x:.6g}, {y:.6g}) m ({math.degrees(theta):.1f} deg) "
                    f"with a contrast of {kappa.real:.3g} between the media is ill-posed (contrasts from "
                    f"{-b:.3g} to {-1 / b:.3g} are); round the corner or check the material"
                )


def _polygon(contour: Contour):
    from shapely.geometry import Polygon

    return Polygon(contour.sample(64))


def scene_layout(problem: Problem) -> Layout:
    """Nest the bodies and number the regions.

    Raises
    ------
    ProblemError
        If a body lies partly inside another or inside an impenetrable body.
    """
    scat = problem.scatterers
    outers = [_polygon(s.body.outer) for s in scat]
    regions = [RegionInfo(None, is_unbounded=True)]
    interior: dict[int, int] = {}
    hole_regions: dict[int, list[int]] = {}
    for i, s in enumerate(scat):
        if s.is_penetrable:
            interior[i] = len(regions)
            regions.append(RegionInfo(i, owner=i))
            hole_regions[i] = []
            for _ in s.body.holes:
                hole_regions[i].append(len(regions))
                regions.append(RegionInfo(None, owner=i))
    container = [0] * len(scat)
    for i in range(len(scat)):
        best_area = float("inf")
        for j, s in enumerate(scat):
            if j == i or not outers[j].contains(outers[i]):
                continue
            if not s.is_penetrable:
                raise ProblemError(
                    f"body {scat[i].name!r} lies inside the impenetrable body {s.name!r}; "
                    "only penetrable bodies may hold other bodies"
                )
            if outers[j].area >= best_area:
                continue
            best_area = outers[j].area
            container[i] = interior[j]
            for h, hole in enumerate(s.body.holes):
                hp = _polygon(hole)
                if hp.contains(outers[i]):
                    container[i] = hole_regions[j][h]
                elif hp.intersects(outers[i]):
                    p = hp.intersection(outers[i]).representative_point()
                    raise ProblemError(
                        f"body {scat[i].name!r} crosses a hole of {s.name!r} near ({p.x:.6g}, {p.y:.6g}) m"
                    )
    contours: list[MeshedContour] = []
    for i, s in enumerate(scat):
        inner = interior.get(i)
        contours.append(MeshedContour(s.body.outer, i, container[i], inner))
        if inner is not None:
            for h, hole in enumerate(s.body.holes):
                contours.append(MeshedContour(hole, i, hole_regions[i][h], inner, is_hole=True))
    return Layout(tuple(regions), tuple(contours))
