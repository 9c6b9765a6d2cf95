from __future__ import annotations

from pathlib import Path

import pytest

#: Real DXF files written by other programs, kept beside the repository.
WILD_DIR = Path(__file__).parents[2].parent / "shared" / "data" / "dxf-in-the-wild"


@pytest.fixture
def wild_dir() -> Path:
    if not WILD_DIR.is_dir():
        pytest.skip(f"{WILD_DIR} is not available")
    return WILD_DIR


# ----------------------------------------------------------------- canonical shapes
# Pieces (metres) for the cleaning tests; each is drawn below in ASCII art.

import math  # noqa: E402
from types import SimpleNamespace  # noqa: E402

import numpy as np  # noqa: E402
from sectionwave.importers.curves import Line, circular_arc  # noqa: E402
from sectionwave.importers.drawing import Piece  # noqa: E402


def polygon(points, layer="0", tag="p"):
    """Closed polygon as line pieces, one handle per edge (``tag0``, ``tag1``...)."""
    pts = np.asarray(points, dtype=float)
    return [Piece(Line(pts[i], pts[(i + 1) % len(pts)]), layer, f"{tag}{i}", f"LINE {tag}{i}")
            for i in range(len(pts))]


def square(x0, y0, size, layer="0", tag="s"):
    #   +-----+
    #   |     |   counter-clockwise, lower-left corner (x0, y0)
    #   +-----+
    return polygon([(x0, y0), (x0 + size, y0), (x0 + size, y0 + size), (x0, y0 + size)],
                   layer, tag)


def circle(cx, cy, r, layer="0", tag="c"):
    #    .-.
    #   (   )     one full arc
    #    '-'
    return [Piece(circular_arc((cx, cy), r, 0.0, 2 * math.pi), layer, tag, f"CIRCLE {tag}")]


def square_with_hole():
    #   +---------+
    #   |  +---+  |   4 x 4 with a 2 x 2 hole in the middle
    #   |  |   |  |
    #   |  +---+  |
    #   +---------+
    return square(0, 0, 4, tag="o") + square(1, 1, 2, tag="h")


def l_shape():
    #   +--+
    #   |  |
    #   |  +--+      area 3
    #   +-----+
    return polygon([(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)], tag="l")


def nested_islands():
    #   +-------------+
    #   | +---------+ |   body (10), hole (8), island (6), hole in the island (4)
    #   | | +-----+ | |
    #   | | | +-+ | | |
    #   | | | +-+ | | |
    #   | | +-----+ | |
    #   | +---------+ |
    #   +-------------+
    return (square(0, 0, 10, tag="a") + square(1, 1, 8, tag="b") + square(2, 2, 6, tag="c")
            + square(3, 3, 4, tag="d"))


def thin_gap(gap):
    #   +--+ +--+
    #   |  | |  |   two unit squares ``gap`` apart
    #   +--+ +--+
    return square(0, 0, 1, tag="L") + square(1 + gap, 0, 1, tag="R")


@pytest.fixture
def shapes():
    return SimpleNamespace(polygon=polygon, square=square, circle=circle,
                           square_with_hole=square_with_hole, l_shape=l_shape,
                           nested_islands=nested_islands, thin_gap=thin_gap)
