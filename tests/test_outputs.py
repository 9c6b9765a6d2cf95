"""Files of a whole run: near-field CSV, VTK read back, ParaView, interrupted runs."""

from __future__ import annotations

import math
import shutil
import subprocess
import textwrap
import xml.etree.ElementTree as ET

import meshio
import numpy as np
import pytest
from sectionwave.engine import parse_case, solve_problem, write_run
from sectionwave.engine.export import read_csv

from tests.reference import C0

RADIUS = 0.1
KA = 6.0


def _case(tmp_path, freqs):
    k = KA / RADIUS
    return {
        "title": "outputs",
        "wave": {"field": "tm", "frequency_hz": freqs if freqs else k * C0 / (2 * math.pi)},
        "body": [{"name": "post", "shape": {"kind": "circle", "radius_m": RADIUS}, "boundary": "pec"}],
        "incident": [{"kind": "plane", "from_deg": [0.0, 60.0]}],
        "far_field": {"angles_deg": {"start": 0, "stop": 360, "count": 91}},
        "near_field": {"x_m": [-0.2, 0.2], "y_m": [-0.15, 0.15], "count": [40, 30]},
        "output": {"plots": True, "vtk": True},
    }


@pytest.fixture(scope="module")
def sweep(tmp_path_factory):
    out = tmp_path_factory.mktemp("run") / "results"
    k = KA / RADIUS
    f0 = k * C0 / (2 * math.pi)
    case = parse_case(_case(out.parent, [f0, 1.1 * f0, 1.2 * f0]))
    result = solve_problem(case.problem)
    write_run(result, out, case.output)
    return out, result


def test_nearfield_csv_columns_mask_and_pec_surface(sweep):
    out, result = sweep
    table = read_csv(out / "nearfield.csv")
    for col in ("frequency_hz", "from_deg", "x_m", "y_m", "inside", "total_re", "total_im",
                "scattered_re", "scattered_im", "incident_re", "incident_im"):
        assert col in table
    inside = table["inside"] == 1
    r = np.hypot(table["x_m"], table["y_m"])
    # exact geometry: the mask is the disc (grid points are not on the circle)
    assert np.array_equal(inside, r < RADIUS)
    assert np.all(np.isnan(table["total_re"][inside]))
    # total = scattered + incident (exact bookkeeping)
    ok = ~inside
    assert np.allclose(table["total_re"][ok], table["scattered_re"][ok] + table["incident_re"][ok], atol=1e-14)
    assert len(table["x_m"]) == 3 * 2 * 40 * 30


def test_vtu_files_read_back_and_match_the_csv(sweep):
    out, result = sweep
    surface = read_csv(out / "surface.csv")
    first = (surface["frequency_hz"] == surface["frequency_hz"][0]) & (surface["from_deg"] == 0.0)
    mesh = meshio.read(out / "boundary_f000_i000.vtu")
    # round trip, exact: the boundary file holds the same surface values as the CSV
    assert np.array_equal(mesh.point_data["u_re"], surface["u_re"][first])
    assert np.array_equal(mesh.point_data["dudn_im"], surface["dudn_im_per_m"][first])
    assert np.allclose(mesh.points[:, 0], surface["x_m"][first], atol=0)
    grid = meshio.read(out / "nearfield_f000_i000.vtu")
    assert grid.points.shape[0] == 40 * 30
    for name in ("total_re", "total_im", "total_abs", "scattered_db", "incident_phase_deg", "inside"):
        assert name in grid.point_data
    for pvd in ("boundary.pvd", "nearfield.pvd"):
        root = ET.parse(out / pvd).getroot()
        files = [d.get("file") for d in root.iter("DataSet")]
        assert len(files) == 6 and all((out / f).exists() for f in files)


def test_paraview_opens_the_sweep(sweep):
    pvpython = shutil.which("pvpython")
    if pvpython is None:
        pytest.skip("ParaView's pvpython is not installed")
    out, _ = sweep
    script = textwrap.dedent(f"""
        from paraview.simple import PVDReader, UpdatePipeline
        r = PVDReader(FileName={str(out / 'nearfield.pvd')!r})
        UpdatePipeline()
        print("STEPS", len(r.TimestepValues))
        info = r.GetDataInformation()
        print("POINTS", info.GetNumberOfPoints())
        print("ARRAYS", ",".join(sorted(r.PointData.keys())))
    """)
    proc = subprocess.run([pvpython, "-c", script], capture_output=True, text=True, timeout=120,
                          env={"QT_QPA_PLATFORM": "offscreen", "PATH": "/usr/bin:/bin"})
    lines = dict(line.split(" ", 1) for line in proc.stdout.splitlines() if line[:1].isupper() and " " in line)
    assert proc.returncode == 0, proc.stderr
    assert int(lines["STEPS"]) == 6  # 3 frequencies x 2 incidences
    assert int(lines["POINTS"]) == 40 * 30
    assert {"total_abs", "scattered_re", "inside"} <= set(lines["ARRAYS"].split(","))


def test_interrupted_write_leaves_nothing_and_keeps_old_results(sweep, tmp_path, monkeypatch):
    out, result = sweep
    target = tmp_path / "again"
    import sectionwave.engine.export.results as res

    def boom(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(res, "_write_plots", boom)
    with pytest.raises(KeyboardInterrupt):
        write_run(result, target)
    assert not target.exists()
    assert not any(p.name.startswith(".again") for p in tmp_path.iterdir())
    # with old results in place and --force, an interruption leaves them untouched
    monkeypatch.undo()
    write_run(result, target)
    before = (target / "summary.json").read_text()
    monkeypatch.setattr(res, "_write_plots", boom)
    with pytest.raises(KeyboardInterrupt):
        write_run(result, target, force=True)
    assert (target / "summary.json").read_text() == before
