"""VTK writers: every file reads back through meshio with the same arrays."""

from __future__ import annotations

from pathlib import Path

import meshio
import numpy as np
import pytest
from defusedxml import ElementTree
from sectionwave.engine.export import (
    ExportError,
    PvdEntry,
    read_csv,
    read_pvd,
    read_vtu,
    split_complex,
    write_boundary_vtu,
    write_grid_vtu,
    write_pvd,
    write_sweep_pvd,
)

# Binary, zlib-compressed float64 arrays: a round trip is bit-exact, so every
# comparison below uses atol = 0 unless it says otherwise.


def _grid(nx: int = 7, ny: int = 5) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    x = np.linspace(-1.0, 2.0, nx)
    y = np.linspace(-0.5, 0.5, ny)
    xx, yy = np.meshgrid(x, y)
    u = np.exp(1j * 2.0 * xx) * (1.0 + 0.1 * yy)
    inside = (xx - 0.5) ** 2 + yy**2 < 0.3**2
    return x, y, u, inside


def test_grid_round_trip(tmp_path: Path) -> None:
    x, y, u, inside = _grid()
    ny, nx = u.shape
    region = np.where(inside, 1.0, 0.0)
    out = write_grid_vtu(
        tmp_path / "near.vtu",
        x,
        y,
        {"u_total": u, "u_scat": u - 1.0},
        inside_mask=inside,
        extra_point_data={"region_id": region, "vec": np.ones((ny, nx, 3))},
        metadata={"frequency_hz": 1.5e9, "from_deg": 30.0},
    )
    mesh = read_vtu(out)
    assert isinstance(mesh, meshio.Mesh)
    xx, yy = np.meshgrid(x, y)
    np.testing.assert_array_equal(mesh.points[:, 0], xx.ravel())  # round trip, exact, metres
    np.testing.assert_array_equal(mesh.points[:, 1], yy.ravel())
    np.testing.assert_array_equal(mesh.points[:, 2], 0.0)  # z = 0
    assert [c.type for c in mesh.cells] == ["quad"]
    assert mesh.cells[0].data.shape == ((nx - 1) * (ny - 1), 4)
    # First cell is counter-clockwise: (0,0), (0,1), (1,1), (1,0) in (j, i).
    assert mesh.cells[0].data[0].tolist() == [0, 1, nx + 1, nx]

    expected = {}
    for name, values in (("u_total", u), ("u_scat", u - 1.0)):
        masked = values.copy()
        masked[inside] = np.nan + 1j * np.nan
        expected.update({k: v.ravel() for k, v in split_complex(name, masked).items()})
    for key, values in expected.items():
        np.testing.assert_array_equal(mesh.point_data[key], values)  # round trip, exact (NaN equal)
    assert np.all(np.isnan(mesh.point_data["u_total_re"][inside.ravel()]))  # masked inside
    assert mesh.point_data["inside"].dtype.kind == "i"  # integer array
    np.testing.assert_array_equal(mesh.point_data["inside"], inside.ravel().astype(int))
    np.testing.assert_array_equal(mesh.point_data["region_id"], region.ravel())
    assert mesh.point_data["vec"].shape == (nx * ny, 3)
    assert mesh.field_data["frequency_hz"].tolist() == [1.5e9]  # FieldData, exact
    assert mesh.field_data["from_deg"].tolist() == [30.0]
    np.testing.assert_allclose(
        mesh.point_data["u_total_abs"][~inside.ravel()],
        np.abs(u[~inside]),
        rtol=1e-15,
        atol=0,
    )  # magnitude consistent with the input, rtol 1e-15


def test_grid_physics_convention_conjugates(tmp_path: Path) -> None:
    x, y, u, _ = _grid()
    mesh = read_vtu(write_grid_vtu(tmp_path / "g.vtu", x, y, {"u": u}, convention="physics"))
    np.testing.assert_array_equal(mesh.point_data["u_im"], -u.imag.ravel())  # conjugate, exact
    np.testing.assert_array_equal(mesh.point_data["u_re"], u.real.ravel())


@pytest.mark.parametrize(("nx", "ny", "cell"), [(4, 1, "line"), (1, 3, "line"), (1, 1, "vertex")])
def test_degenerate_grids(tmp_path: Path, nx: int, ny: int, cell: str) -> None:
    x = np.arange(nx, dtype=float)
    y = np.arange(ny, dtype=float)
    u = np.ones((ny, nx), dtype=complex)
    mesh = read_vtu(write_grid_vtu(tmp_path / "g.vtu", x, y, {"u": u}))
    assert mesh.cells[0].type == cell  # cell kind for a 1D / 0D grid
    assert mesh.points.shape == (nx * ny, 3)


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"fields": {"u": np.ones((5, 6))}}, "expected \\(ny, nx\\)"),
        ({"x": np.array([0.0, 0.0, 1.0, 2.0, 3.0, 4.0, 5.0])}, "strictly increasing"),
        ({"inside_mask": np.zeros((7, 5), bool)}, "inside_mask"),
        ({"fields": {"inside": np.ones((5, 7))}}, "reserved"),
        ({"extra_point_data": {"u_re": np.ones((5, 7))}}, "written twice"),
        ({"path_name": "g.vtk"}, "must end in .vtu"),
    ],
)
def test_grid_rejects_bad_input(tmp_path: Path, kwargs: dict, match: str) -> None:
    x, y, u, _ = _grid()
    args = {"x": x, "y": y, "fields": {"u": u}}
    name = kwargs.pop("path_name", "g.vtu")
    args.update(kwargs)
    with pytest.raises(ExportError, match=match):
        write_grid_vtu(tmp_path / name, **args)
    assert list(tmp_path.iterdir()) == []  # nothing written


def _two_bodies() -> tuple[np.ndarray, ...]:
    # Body 0: a circle of 6 nodes; body 1: a square with a 4-node outer
    # contour and a 3-node hole (contour ids 1 and 2).
    t = np.linspace(0, 2 * np.pi, 6, endpoint=False)
    circle = np.column_stack([np.cos(t), np.sin(t)])
    square = np.array([[3.0, -1], [5, -1], [5, 1], [3, 1]])
    hole = np.array([[4.0, 0.5], [4.5, -0.5], [3.5, -0.5]])
    points = np.vstack([circle, square, hole])
    normals = np.vstack([circle, np.tile([0.0, 1.0], (7, 1))])
    body = np.array([0] * 6 + [1] * 7)
    contour = np.array([0] * 6 + [1] * 4 + [2] * 3)
    return points, normals, body, contour


def test_boundary_round_trip(tmp_path: Path) -> None:
    points, normals, body, contour = _two_bodies()
    n = points.shape[0]
    rng = np.random.default_rng(3)
    u = rng.normal(size=n) + 1j * rng.normal(size=n)
    weight = rng.random(n)
    out = write_boundary_vtu(
        tmp_path / "surface.vtu",
        points,
        normals,
        body,
        contour,
        {"u": u, "dudn": 2j * u},
        real_fields={"weight_m": weight},
        metadata={"frequency_hz": 3e8},
    )
    mesh = read_vtu(out)
    np.testing.assert_array_equal(mesh.points[:, :2], points)  # round trip, exact
    np.testing.assert_array_equal(mesh.points[:, 2], 0.0)
    np.testing.assert_array_equal(mesh.point_data["normal"][:, :2], normals)  # 3-vector
    np.testing.assert_array_equal(mesh.point_data["normal"][:, 2], 0.0)
    np.testing.assert_array_equal(mesh.point_data["body_id"], body)
    np.testing.assert_array_equal(mesh.point_data["contour_id"], contour)
    np.testing.assert_array_equal(mesh.point_data["weight_m"], weight)
    for name, values in (("u", u), ("dudn", 2j * u)):
        for key, part in split_complex(name, values).items():
            np.testing.assert_array_equal(mesh.point_data[key], part)  # exact
    assert mesh.field_data["frequency_hz"].tolist() == [3e8]
    lines = mesh.cells[0]
    assert lines.type == "line"
    # Closed loops: 6 + 4 + 3 segments, each contour's last node back to its first.
    assert lines.data.tolist() == (
        [[0, 1], [1, 2], [2, 3], [3, 4], [4, 5], [5, 0]]
        + [[6, 7], [7, 8], [8, 9], [9, 6]]
        + [[10, 11], [11, 12], [12, 10]]
    )  # connectivity, exact


def test_boundary_open_contours_and_interleaved_nodes(tmp_path: Path) -> None:
    points = np.array([[0.0, 0], [5, 0], [1, 0], [6, 0], [2, 0]])
    normals = np.tile([0.0, 1.0], (5, 1))
    contour = np.array([0, 1, 0, 1, 0])
    mesh = read_vtu(
        write_boundary_vtu(
            tmp_path / "b.vtu", points, normals, np.zeros(5, int), contour, {}, closed=False
        )
    )
    assert mesh.cells[0].data.tolist() == [[0, 2], [2, 4], [1, 3]]  # in array order, exact


def test_boundary_rejects_bad_shapes(tmp_path: Path) -> None:
    points, normals, body, contour = _two_bodies()
    with pytest.raises(ExportError, match="normals"):
        write_boundary_vtu(tmp_path / "b.vtu", points, normals[:-1], body, contour, {})
    with pytest.raises(ExportError, match="body_id must be integers"):
        write_boundary_vtu(tmp_path / "b.vtu", points, normals, body * 1.0, contour, {})
    with pytest.raises(ExportError, match="field 'u'"):
        write_boundary_vtu(tmp_path / "b.vtu", points, normals, body, contour, {"u": [1j]})


def test_pvd_is_valid_xml_pointing_to_existing_files(tmp_path: Path) -> None:
    x, y, u, _ = _grid()
    (tmp_path / "steps").mkdir()
    files = [write_grid_vtu(tmp_path / "steps" / f"g{i}.vtu", x, y, {"u": u * i}) for i in range(3)]
    pvd = write_pvd(
        tmp_path / "sweep.pvd",
        [(0.5, files[0]), PvdEntry(1.5, "steps/g1.vtu", 0, "second"), (2.5, files[2])],
    )
    root = ElementTree.parse(pvd).getroot()  # well-formed XML
    assert root.tag == "VTKFile" and root.get("type") == "Collection"
    datasets = root.findall("./Collection/DataSet")
    assert [d.get("file") for d in datasets] == ["steps/g0.vtu", "steps/g1.vtu", "steps/g2.vtu"]
    for d in datasets:
        assert (tmp_path / d.get("file")).is_file()  # relative path resolves
        assert read_vtu(tmp_path / d.get("file")).points.shape[0] == u.size
    entries = read_pvd(pvd)
    assert [e.timestep for e in entries] == [0.5, 1.5, 2.5]  # round trip, exact
    assert entries[1].name == "second" and entries[0].name is None
    assert all(e.part == 0 for e in entries)


def test_sweep_pvd_two_dimensions(tmp_path: Path) -> None:
    x, y, u, _ = _grid()
    runs = []
    for f in (3e9, 1e9):  # given out of order on purpose
        for a in (90.0, 0.0):
            name = f"g_{f:.0e}_{a:.0f}.vtu"
            write_grid_vtu(tmp_path / name, x, y, {"u": u}, metadata={"frequency_hz": f})
            runs.append((f, a, tmp_path / name))
    pvd = write_sweep_pvd(tmp_path / "near.pvd", runs)
    entries = read_pvd(pvd)
    assert [e.timestep for e in entries] == [0.0, 1.0, 2.0, 3.0]  # running index
    assert [e.file for e in entries] == [
        "g_1e+09_0.vtu",
        "g_1e+09_90.vtu",
        "g_3e+09_0.vtu",
        "g_3e+09_90.vtu",
    ]  # sorted by frequency then incidence
    assert entries[1].name == "f=1e+09 Hz, from_deg=90"
    steps = read_csv(tmp_path / "near_steps.csv")
    assert steps["frequency_hz"].tolist() == [1e9, 1e9, 3e9, 3e9]  # companion table, exact
    assert steps["from_deg"].tolist() == [0.0, 90.0, 0.0, 90.0]
    assert steps["file"].tolist() == [e.file for e in entries]
    with pytest.raises(ExportError, match="one incidence per frequency"):
        write_sweep_pvd(tmp_path / "f.pvd", runs, timestep="frequency")
    single = write_sweep_pvd(
        tmp_path / "f.pvd", [r for r in runs if r[1] == 0.0], timestep="frequency"
    )
    assert [e.timestep for e in read_pvd(single)] == [1e9, 3e9]
    with pytest.raises(ExportError, match="appears twice"):
        write_sweep_pvd(tmp_path / "d.pvd", runs + runs[:1])


def test_read_pvd_refuses_other_xml(tmp_path: Path) -> None:
    (tmp_path / "x.pvd").write_text('<VTKFile type="UnstructuredGrid"/>')
    with pytest.raises(ExportError, match="not a VTK Collection"):
        read_pvd(tmp_path / "x.pvd")
