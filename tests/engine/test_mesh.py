"""Panel meshes: sizes, Gauss-Legendre geometry on the exact curves, corner and gap refinement.

Exact references: the circle's perimeter 2 pi r, normal (x - c) / r and
curvature 1 / r; Gauss-Legendre with p nodes integrates polynomials of
degree below 2p exactly (any numerical analysis text), so Legendre
coefficients of a low-degree polynomial above its degree are zero.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.polynomial import legendre
from sectionwave.engine.mesh import (
    GAP_RATIO,
    RATIO_SLACK,
    BoundaryContour,
    PanelMesh,
    build_panels,
    corner_levels_for,
    regrade,
)
from sectionwave.importers.curves import Contour, circular_arc, polygon_segments
from sectionwave.importers.errors import GeometryError

CENTER = np.array([0.3, -0.2])
RADIUS = 0.7


def circle(center=CENTER, radius=RADIUS) -> Contour:
    return Contour((circular_arc(center, radius, 0.0, 2 * math.pi),))


def square(x0=0.0, y0=0.0, side=1.0) -> Contour:
    return Contour(polygon_segments([[x0, y0], [x0 + side, y0], [x0 + side, y0 + side], [x0, y0 + side]]))


def neighbour_ratio(mesh: PanelMesh) -> float:
    _, nxt = mesh.neighbours()
    r = mesh.lengths / mesh.lengths[nxt]
    return float(max(r.max(), (1 / r).max()))


# ----------------------------------------------------------------- circle


@pytest.mark.parametrize("p,wavelength,per_wavelength", [(16, 0.1, 1.0), (10, 0.1, 0.5), (16, 5.0, 1.0)])
def test_circle_panels(p, wavelength, per_wavelength):
    mesh = build_panels([BoundaryContour(circle(), 0, wavelength)], p=p, max_panel_wavelengths=per_wavelength)
    assert mesh.p == p and mesh.n_nodes == p * mesh.n_panels
    assert mesh.nodes.shape == mesh.normals.shape == (mesh.n_nodes, 2)
    assert np.all(mesh.lengths <= per_wavelength * wavelength * (1 + 1e-12))
    # Gauss-Legendre on the exact arc: the weights add up to the perimeter 2 pi r
    assert abs(mesh.weights.sum() - 2 * math.pi * RADIUS) < 1e-13 * 2 * math.pi * RADIUS
    assert np.allclose(mesh.lengths, mesh.weights.reshape(-1, p).sum(axis=1), rtol=1e-15)
    # nodes on the circle, normals out of the body, curvature 1/r (positive: convex, counter-clockwise)
    radial = mesh.nodes - CENTER
    assert np.allclose(np.hypot(*radial.T), RADIUS, rtol=0, atol=1e-14)
    assert np.allclose(mesh.normals, radial / RADIUS, rtol=0, atol=1e-13)
    assert np.allclose(mesh.curvature, 1 / RADIUS, rtol=1e-12)
    assert not mesh.corner_at_start.any()
    assert np.array_equal(mesh.body_of_node, np.zeros(mesh.n_nodes))
    assert np.array_equal(mesh.panel_of_node, np.repeat(np.arange(mesh.n_panels), p))


def test_circle_panel_ends_and_complex_nodes():
    mesh = build_panels([BoundaryContour(circle(), 0, 0.3)])
    assert np.allclose(np.hypot(*(mesh.ends - CENTER).reshape(-1, 2).T), RADIUS, atol=1e-14)
    # consecutive panels join: each panel ends where the next starts
    _, nxt = mesh.neighbours()
    assert np.allclose(mesh.ends[:, 1], mesh.ends[nxt, 0], atol=1e-14)
    z = mesh.complex_nodes()
    assert np.array_equal(z.real, mesh.nodes[:, 0]) and np.array_equal(z.imag, mesh.nodes[:, 1])


def test_nodes_are_gauss_legendre_points_of_each_panel():
    # on a circle the arc angle is linear in the panel parameter, so node angles are the
    # Gauss-Legendre points mapped onto each panel's angular interval
    p = 8
    mesh = build_panels([BoundaryContour(circle(), 0, 0.5)], p=p)
    x, _ = legendre.leggauss(p)
    ang = np.unwrap(np.arctan2(*(mesh.nodes - CENTER)[:, ::-1].T)).reshape(-1, p)
    a0 = np.arctan2(*(mesh.ends[:, 0] - CENTER)[:, ::-1].T)
    a1 = a0 + mesh.lengths / RADIUS
    expect = a0[:, None] + 0.5 * (a1 - a0)[:, None] * (x + 1)
    diff = (ang - expect + math.pi) % (2 * math.pi) - math.pi
    assert np.abs(diff).max() < 1e-13


def test_arclength_derivative_of_a_coordinate_is_the_tangent():
    mesh = build_panels([BoundaryContour(circle(), 0, 0.5)])
    d = mesh.arclength_derivative()
    p = mesh.p
    # d/ds of x along a counter-clockwise contour is the unit tangent's x, = -normal_y
    dx = np.concatenate([d[i] @ mesh.nodes[i * p:(i + 1) * p, 0] for i in range(mesh.n_panels)])
    assert np.allclose(dx, -mesh.normals[:, 1], atol=1e-10)


# ----------------------------------------------------------------- square: corners


@pytest.fixture(scope="module")
def square_mesh() -> PanelMesh:
    return build_panels([BoundaryContour(square(), 0, 1.0)], tolerance=1e-8)


def test_square_basic_geometry(square_mesh):
    m = square_mesh
    assert abs(m.weights.sum() - 4.0) < 1e-13
    assert m.corner_at_start.sum() == 4
    assert np.all(m.curvature == 0)
    # normals out of the unit square: along -y, +x, +y, -x on its four sides
    outward = m.nodes - 0.5
    assert np.all(np.einsum("ij,ij->i", m.normals, outward) > 0)
    assert np.allclose(np.abs(m.normals).max(axis=1), 1.0, atol=1e-15)


def test_square_corner_panels_are_refined_dyadically(square_mesh):
    m = square_mesh
    prev, _ = m.neighbours()
    corners = np.array([[0, 0], [1, 0], [1, 1], [0, 1]], dtype=float)
    first = np.flatnonzero(m.corner_at_start)
    # each corner panel starts at a corner of the square
    assert {tuple(np.round(m.ends[i, 0], 12)) for i in first} == {tuple(c) for c in corners}
    # both panels touching a corner are the smallest and of equal length
    assert np.allclose(m.lengths[first], m.lengths.min(), rtol=1e-12)
    assert np.allclose(m.lengths[prev[first]], m.lengths[first], rtol=1e-12)
    # every panel of a side is a power-of-two fraction of the side
    levels = -np.log2(m.lengths)
    assert np.allclose(levels, np.round(levels), atol=1e-9)
    # deep enough to resolve r^(2/3) singularities: far more levels than uniform sizing gives
    assert 20 <= levels.max() <= corner_levels_for(1e-8)
    # walking away from a corner the panels grow by a factor 1 or 2 each time
    _, nxt = m.neighbours()
    i = first[0]
    seq = [m.lengths[i]]
    for _ in range(10):
        i = nxt[i]
        seq.append(m.lengths[i])
    steps = np.array(seq[1:]) / np.array(seq[:-1])
    assert set(np.round(steps, 12)) <= {1.0, 2.0}


def test_square_neighbour_ratio_after_regrade(square_mesh):
    assert neighbour_ratio(square_mesh) <= 2 * RATIO_SLACK


def test_corner_levels_follow_the_tolerance():
    loose = build_panels([BoundaryContour(square(), 0, 1.0)], tolerance=1e-4)
    tight = build_panels([BoundaryContour(square(), 0, 1.0)], tolerance=1e-10)
    assert loose.lengths.min() > tight.lengths.min()
    fixed = build_panels([BoundaryContour(square(), 0, 1.0)], corner_levels=5)
    assert fixed.lengths.min() == pytest.approx(2.0**-5, rel=1e-12)
    # about two levels per binary digit of the tolerance, between 4 and 40
    assert corner_levels_for(1e-4) == math.ceil(2 * math.log2(1e4)) == 27
    assert corner_levels_for(1e-8) == 40 and corner_levels_for(0.5) == 4


def test_regrade_restores_the_neighbour_ratio():
    mesh = build_panels([BoundaryContour(circle(), 0, 10.0)], p=8)
    n0 = mesh.n_panels
    for _ in range(6):  # halve the first panel's first half again and again
        mesh = mesh.split([0])
    assert neighbour_ratio(mesh) > 2 * RATIO_SLACK
    graded = regrade(mesh)
    assert neighbour_ratio(graded) <= 2 * RATIO_SLACK
    assert graded.n_panels > n0 + 6
    assert abs(graded.weights.sum() - 2 * math.pi * RADIUS) < 1e-13


# ----------------------------------------------------------------- thin gaps


@pytest.mark.parametrize("gap", [0.05, 0.01])
def test_thin_gap_between_two_bodies(gap):
    # two unit squares side by side with a gap; a long wavelength so only the gap sizes panels
    a, b = square(0.0), square(1.0 + gap)
    mesh = build_panels([BoundaryContour(a, 0, 10.0), BoundaryContour(b, 1, 10.0)], corner_levels=0)
    assert np.array_equal(mesh.body_of_contour, [0, 1])
    facing = np.zeros(mesh.n_panels, dtype=bool)
    mid = 0.5 * (mesh.ends[:, 0] + mesh.ends[:, 1])
    facing |= (np.abs(mid[:, 0] - 1.0) < 1e-12) & (mesh.contour_of_panel == 0)
    facing |= (np.abs(mid[:, 0] - (1.0 + gap)) < 1e-12) & (mesh.contour_of_panel == 1)
    assert facing.sum() >= 2 / gap
    assert mesh.lengths[facing].max() <= GAP_RATIO * gap * (1 + 1e-12)
    # the far sides stay coarse
    far = (np.abs(mid[:, 0]) < 1e-12) & (mesh.contour_of_panel == 0)
    assert mesh.lengths[far].max() > 10 * gap


def test_far_bodies_are_not_refined():
    a, b = square(0.0), square(5.0)
    mesh = build_panels([BoundaryContour(a, 0, 10.0), BoundaryContour(b, 1, 10.0)], corner_levels=0)
    assert mesh.n_panels == 8


# ----------------------------------------------------------------- subset, split, neighbours


@pytest.fixture(scope="module")
def two_contours() -> PanelMesh:
    return build_panels([BoundaryContour(circle(), 0, 0.5),
                         BoundaryContour(circle((3.0, 0.0), 0.4), 1, 0.5)], p=8)


def test_subset(two_contours):
    m = two_contours
    sub = m.subset([1])
    own = m.contour_of_node == 1
    assert np.array_equal(sub.nodes, m.nodes[own]) and np.array_equal(sub.weights, m.weights[own])
    assert np.array_equal(sub.contour_of_panel, np.zeros(sub.n_panels))
    assert np.array_equal(sub.body_of_contour, [1])
    swapped = m.subset([1, 0])
    assert np.array_equal(swapped.nodes, np.vstack([m.nodes[own], m.nodes[~own]]))
    assert np.array_equal(swapped.contour_of_panel[: sub.n_panels], np.zeros(sub.n_panels))
    assert np.array_equal(swapped.body_of_contour, [1, 0])


def test_split(two_contours):
    m = two_contours
    s = m.split([0, m.n_panels - 1])
    assert s.n_panels == m.n_panels + 2
    assert abs(s.weights.sum() - m.weights.sum()) < 1e-13
    # on a circle the parameter halves are equal halves of the arc
    assert np.allclose(s.lengths[:2], 0.5 * m.lengths[0], rtol=1e-13)
    assert np.allclose(s.lengths[-2:], 0.5 * m.lengths[-1], rtol=1e-13)
    assert np.allclose(s.ends[0, 1], s.ends[1, 0], atol=1e-15)
    assert np.array_equal(s.lengths[2:-2], m.lengths[1:-1])


def test_split_keeps_the_corner_flag_on_the_first_half():
    m = build_panels([BoundaryContour(square(), 0, 10.0)], corner_levels=0)
    first = np.flatnonzero(m.corner_at_start)
    s = m.split(first.tolist())
    assert s.corner_at_start.sum() == 4
    assert np.allclose(s.ends[s.corner_at_start, 0] % 1.0, 0.0)


def test_neighbours(two_contours):
    m = two_contours
    prev, nxt = m.neighbours()
    assert np.array_equal(prev[nxt], np.arange(m.n_panels))
    for c in (0, 1):
        idx = np.flatnonzero(m.contour_of_panel == c)
        assert np.array_equal(nxt[idx], np.roll(idx, -1))
        assert np.array_equal(prev[idx], np.roll(idx, 1))
        # the panel after a panel starts where it ends
        assert np.allclose(m.ends[idx, 1], m.ends[nxt[idx], 0], atol=1e-14)


# ----------------------------------------------------------------- Legendre tails


def test_legendre_tails_vanish_for_a_low_degree_polynomial():
    # on straight panels x and y are linear in the panel parameter, so (x + 2y)^5 + j x y
    # is a polynomial of degree 5 < p - 2 on every panel
    m = build_panels([BoundaryContour(square(), 0, 0.5)], corner_levels=3)
    x, y = m.nodes.T
    f = (x + 2 * y) ** 5 + 1j * x * y
    assert m.legendre_tails(f).max() < 1e-12 * np.abs(f).max()


def test_legendre_tails_measure_the_top_coefficients():
    # a density equal to P_{p-1} + 2j P_{p-2} of the panel parameter has tail sqrt(1 + 4)
    m = build_panels([BoundaryContour(square(), 0, 0.5)], corner_levels=0)
    p = m.p
    t, _ = legendre.leggauss(p)
    top = legendre.legval(t, np.eye(p)[p - 1]) + 2j * legendre.legval(t, np.eye(p)[p - 2])
    tails = m.legendre_tails(np.tile(top, m.n_panels))
    assert np.allclose(tails, math.sqrt(5.0), rtol=1e-12)


def test_nothing_to_mesh():
    with pytest.raises(GeometryError, match="nothing to mesh"):
        build_panels([])
