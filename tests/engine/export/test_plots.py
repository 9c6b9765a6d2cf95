"""Plots: each writes a readable, non-empty image without a display."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from sectionwave.engine.export import (
    ExportError,
    plot_echo_width_cartesian,
    plot_echo_width_polar,
    plot_echo_width_vs_frequency,
    plot_field_map,
    plot_mesh_preview,
)

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def _check_png(path: Path) -> None:
    from matplotlib.image import imread

    data = path.read_bytes()
    assert data[:8] == PNG_SIGNATURE  # PNG file signature (PNG spec), exact
    assert len(data) > 5000  # non-empty drawing, not a blank canvas (rule of thumb)
    image = imread(path)
    assert image.ndim == 3 and min(image.shape[:2]) > 300  # decodes, readable size
    assert float(image[..., :3].std()) > 0.01  # something was drawn
    assert [p.name for p in path.parent.iterdir()] == [path.name]  # no temporary left


def _circle(radius: float = 0.3, n: int = 64) -> np.ndarray:
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    return radius * np.column_stack([np.cos(t), np.sin(t)])


@pytest.mark.parametrize("quantity", ["abs", "real", "db"])
def test_field_map(tmp_path: Path, quantity: str) -> None:
    x = np.linspace(-1, 1, 41)
    y = np.linspace(-0.8, 0.8, 33)
    xx, yy = np.meshgrid(x, y)
    u = np.exp(-1j * 6 * xx) * (1 + 0.2 * yy)
    u[xx**2 + yy**2 < 0.09] = np.nan
    u[0, 0] = 0.0  # a zero must not break the dB scale
    out = plot_field_map(
        tmp_path / "field.png",
        x,
        y,
        u,
        [_circle()],
        quantity=quantity,  # type: ignore[arg-type]
        title="total field",
        field_symbol="E_z",
        field_unit="V/m",
    )
    _check_png(out)


def test_echo_width_plots(tmp_path: Path) -> None:
    angles = np.linspace(0, 360, 361)
    curves = {
        "TM": 10 * np.log10(1.0 + np.cos(np.radians(angles)) ** 2),
        "TE": -30 + 5 * np.sin(np.radians(3 * angles)),
        "far below": np.full(angles.size, -200.0),
    }
    curves["TM"][10] = np.nan
    for name, plot in (("polar", plot_echo_width_polar), ("cart", plot_echo_width_cartesian)):
        folder = tmp_path / name
        folder.mkdir()
        _check_png(plot(folder / "echo.png", angles, curves, title="circle, 1 GHz"))


@pytest.mark.parametrize("top_hz", [500.0, 5e3, 3e8, 1e10])
def test_echo_width_vs_frequency(tmp_path: Path, top_hz: float) -> None:
    f = np.linspace(top_hz / 10, top_hz, 25)
    out = plot_echo_width_vs_frequency(
        tmp_path / "mono.png", f, {"phi_inc=0 deg": np.log(f), "phi_inc=90 deg": -np.log(f)}
    )
    _check_png(out)


def test_mesh_preview(tmp_path: Path) -> None:
    # Circle of radius 1 cut into 8 panels with 4 nodes each.
    n_panels, per = 8, 4
    edges = np.linspace(0, 2 * np.pi, n_panels + 1)
    ends = np.stack(
        [
            np.column_stack([np.cos(edges[:-1]), np.sin(edges[:-1])]),
            np.column_stack([np.cos(edges[1:]), np.sin(edges[1:])]),
        ],
        axis=1,
    )
    t = (edges[:-1, None] + (np.arange(per) + 0.5) / per * np.diff(edges)[:, None]).ravel()
    nodes = np.column_stack([np.cos(t), np.sin(t)])
    out = plot_mesh_preview(
        tmp_path / "mesh.png",
        [_circle(1.0, 200)],
        nodes,
        nodes,
        list(ends),
        np.linspace(0.1, 0.4, n_panels),
        max_normals=10,
    )
    _check_png(out)


def test_svg_by_suffix_and_bad_suffix(tmp_path: Path) -> None:
    out = plot_echo_width_cartesian(tmp_path / "e.svg", [0.0, 1.0], {"a": [0.0, 1.0]})
    assert out.read_text()[:200].lstrip().startswith("<?xml")  # SVG chosen by suffix
    with pytest.raises(ExportError, match="must end in"):
        plot_echo_width_cartesian(tmp_path / "e.jpg", [0.0, 1.0], {"a": [0.0, 1.0]})
    with pytest.raises(ExportError, match="curve 'a'"):
        plot_echo_width_polar(tmp_path / "p.png", [0.0, 1.0], {"a": [0.0]})
    with pytest.raises(ExportError, match="quantity"):
        plot_field_map(tmp_path / "f.png", [0, 1], [0, 1], np.ones((2, 2)), quantity="imag")  # type: ignore[arg-type]


def test_png_is_reproducible(tmp_path: Path) -> None:
    a = plot_echo_width_cartesian(tmp_path / "a.png", [0.0, 1.0, 2.0], {"x": [0.0, 1.0, 0.5]})
    b = plot_echo_width_cartesian(tmp_path / "b.png", [0.0, 1.0, 2.0], {"x": [0.0, 1.0, 0.5]})
    assert a.read_bytes() == b.read_bytes()  # same input, same bytes (no timestamp)
