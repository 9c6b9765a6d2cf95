"""The results folder as a user opens it: headers, column order, units, switches, plot selection.

Sources: common practice of spreadsheet-friendly CSV (the first line is the
header row); the column contract in ``engine/export/results.py``'s module
docstring and README.txt of every folder.
"""

from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import meshio
import pytest
from sectionwave.engine.cli import main
from sectionwave.engine.export import read_csv

CASE = """
title = "square"
[wave]
field = "tm"
frequency_hz = [1e9, 1.5e9]
[[body]]
name = "sq"
shape = { kind = "rectangle", width_m = 0.1, height_m = 0.1 }
boundary = "pec"
[[incident]]
kind = "plane"
name = "pw"
from_deg = { start = 0, stop = 180, count = 13 }
[far_field]
angles_deg = { start = 0, stop = 360, count = 37 }
[near_field]
x_m = [-0.1, 0.1]
y_m = [-0.1, 0.1]
count = [5, 5]
[solver]
tolerance = 1e-6
"""

FIRST = ["frequency_hz", "incident", "from_deg"]


def _run(tmp_path: Path, text: str, name: str) -> Path:
    case = tmp_path / f"{name}.toml"
    case.write_text(text)
    out = tmp_path / name
    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        code = main(["run", str(case), "--out", str(out), "--quiet"])
    assert code == 0, err.getvalue()
    return out


@pytest.fixture(scope="module")
def folder(tmp_path_factory) -> Path:
    return _run(tmp_path_factory.mktemp("files"), CASE, "full")


def test_every_csv_opens_with_its_header_and_the_same_first_columns(folder):
    csvs = sorted(folder.glob("*.csv"))
    assert {p.name for p in csvs} >= {"farfield.csv", "monostatic.csv", "surface.csv", "nearfield.csv"}
    for path in csvs:
        header = path.read_text().splitlines()[0]
        assert not header.startswith("#"), path.name
        if path.name.endswith("_steps.csv"):
            assert header.split(",")[:3] == ["timestep", "frequency_hz", "from_deg"]
            continue
        assert header.split(",")[:3] == FIRST, (path.name, header)


def test_monostatic_has_the_incident_name_and_columns_carry_units(folder):
    mono = read_csv(folder / "monostatic.csv")
    assert set(mono["incident"]) == {"pw"}
    ff = (folder / "farfield.csv").read_text().splitlines()[0].split(",")
    assert ff == FIRST + ["angle_deg", "farfield_re_sqrt_m", "farfield_im_sqrt_m", "echo_width_m",
                          "echo_width_db_m", "echo_width_db_lambda"]
    surface = (folder / "surface.csv").read_text().splitlines()[0].split(",")
    assert "dudn_re_per_m" in surface and "current_z_re_a_per_m" in surface


def test_folder_readme_says_per_unit_incident_amplitude(folder):
    text = (folder / "README.txt").read_text()
    assert "per unit incident E_z" in text and "sqrt(m)" in text and "infinitely long" in text
    summary = json.loads((folder / "summary.json").read_text())
    assert "README.txt" in summary["files"]


def test_one_name_for_the_incidence_angle_in_vtk(folder):
    mesh = meshio.read(folder / "boundary_f000_i003.vtu")
    assert mesh.field_data["from_deg"].tolist() == [45.0]
    steps = read_csv(folder / "boundary_steps.csv")
    assert steps["from_deg"].tolist()[:2] == [0.0, 15.0]
    assert "from_deg=15" in (folder / "boundary.pvd").read_text()


def test_plots_say_what_they_left_out(folder):
    # 2 frequencies x 13 incidences = 26 curves, more than the 12 a plot holds
    summary = json.loads((folder / "summary.json").read_text())
    (note,) = [n for n in summary["notes"] if "bistatic plots show" in n]
    assert "of 26" in note and "plot_from_deg" in note and "farfield.csv" in note
    maps = sorted(p.name for p in folder.glob("nearfield_*.png"))
    assert 0 < len(maps) <= 12


def test_switches_for_the_bulky_outputs_and_plot_selection(tmp_path, folder):
    text = CASE + """
[output]
surface_csv = false
vtk_per_incidence = false
plot_from_deg = [0, 90]
field_map = "db"
"""
    out = _run(tmp_path, text, "lean")
    assert not (out / "surface.csv").exists()
    vtus = sorted(p.name for p in out.glob("boundary_*.vtu"))
    assert vtus == ["boundary_f000.vtu", "boundary_f001.vtu"]
    mesh = meshio.read(out / "boundary_f001.vtu")
    assert "u_i012_re" in mesh.point_data or any(k.startswith("u_i012") for k in mesh.point_data)
    # the same values as the per-incidence file of the full run (same case, same machine)
    full = meshio.read(folder / "boundary_f001_i012.vtu")
    key = next(k for k in full.point_data if k.startswith("u_re"))
    assert (mesh.point_data[key.replace("u_", "u_i012_", 1)] == full.point_data[key]).all()
    summary = json.loads((out / "summary.json").read_text())
    (note,) = [n for n in summary["notes"] if "bistatic plots show" in n]
    assert "4 of 26" in note and "from_deg=0, from_deg=90" in note
    size = sum(p.stat().st_size for p in out.iterdir())
    assert size < sum(p.stat().st_size for p in folder.iterdir())


def test_curve_styles_do_not_repeat():
    from sectionwave.engine.export.plots import _style

    looks = {(s["linestyle"] if isinstance(s["linestyle"], str) else str(s["linestyle"]), s["marker"])
             for s in (_style(i, 100) for i in range(12))}
    assert len(looks) == 12
