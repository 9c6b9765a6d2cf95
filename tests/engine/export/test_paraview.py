"""Open the written files in ParaView itself (pvpython, headless).

Skipped when ParaView's ``pvpython`` is not installed (on Debian it comes
with the ``python3-paraview`` package). One subprocess runs every check so
the test costs one ParaView start-up, about 2-3 s.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from sectionwave.engine.export import (
    read_csv,
    split_complex,
    write_boundary_vtu,
    write_grid_vtu,
    write_sweep_pvd,
)

PVPYTHON = shutil.which("pvpython")

FREQUENCIES_HZ = (1.0e9, 2.0e9, 3.0e9)
INCIDENCES_DEG = (0.0, 90.0)

# Runs inside ParaView's Python; prints one JSON line prefixed by RESULT.
SCRIPT = r"""
import json, sys
from paraview.simple import PVDReader, XMLUnstructuredGridReader
from paraview import servermanager

pvd, boundary = sys.argv[1], sys.argv[2]
reader = PVDReader(FileName=pvd)
reader.UpdatePipeline()
times = [float(t) for t in reader.TimestepValues]
out = {"times": times, "steps": []}
for t in times:
    reader.UpdatePipeline(t)
    data = servermanager.Fetch(reader)
    point_data = data.GetPointData()
    arrays = {}
    for i in range(point_data.GetNumberOfArrays()):
        array = point_data.GetArray(i)
        arrays[array.GetName()] = [array.GetNumberOfComponents()] + list(array.GetRange(-1))
    field_data = data.GetFieldData()
    metadata = {}
    for i in range(field_data.GetNumberOfArrays()):
        array = field_data.GetArray(i)
        if array is not None and array.GetNumberOfComponents() == 1:
            metadata[field_data.GetArrayName(i)] = array.GetValue(0)
    out["steps"].append({
        "class": data.GetClassName(),
        "points": data.GetNumberOfPoints(),
        "cells": data.GetNumberOfCells(),
        "arrays": arrays,
        "metadata": metadata,
    })
info = reader.GetDataInformation()
out["info_points"] = info.GetNumberOfPoints()
surface = XMLUnstructuredGridReader(FileName=[boundary])
surface.UpdatePipeline()
data = servermanager.Fetch(surface)
out["boundary"] = {
    "points": data.GetNumberOfPoints(),
    "cells": data.GetNumberOfCells(),
    "cell_type": data.GetCellType(0),
    "normal_components": data.GetPointData().GetArray("normal").GetNumberOfComponents(),
    "arrays": sorted(data.GetPointData().GetArrayName(i)
                     for i in range(data.GetPointData().GetNumberOfArrays())),
}
print("RESULT " + json.dumps(out))
"""


def _field(x: np.ndarray, y: np.ndarray, step: int, incidence_deg: float) -> np.ndarray:
    xx, yy = np.meshgrid(x, y)
    k = 2.0 + step
    phi = np.radians(incidence_deg)
    # Plane wave exp(+j k (x cos phi + y sin phi)) scaled by (step + 1), so
    # every step has its own magnitude range.
    return (step + 1.0) * np.exp(1j * k * (xx * np.cos(phi) + yy * np.sin(phi)))


@pytest.mark.skipif(PVPYTHON is None, reason="ParaView's pvpython is not installed")
def test_paraview_reads_sweep_and_boundary(tmp_path: Path) -> None:
    assert PVPYTHON is not None
    x = np.linspace(-1.0, 1.0, 9)
    y = np.linspace(-0.5, 0.5, 5)
    xx, yy = np.meshgrid(x, y)
    inside = xx**2 + yy**2 < 0.3**2
    (tmp_path / "near").mkdir()
    runs = []
    expected = []
    for fi, f in enumerate(FREQUENCIES_HZ):
        for ai, a in enumerate(INCIDENCES_DEG):
            step = fi * len(INCIDENCES_DEG) + ai
            u = _field(x, y, step, a)
            name = tmp_path / "near" / f"near_f{fi}_a{ai}.vtu"
            write_grid_vtu(
                name,
                x,
                y,
                {"u_total": u},
                inside_mask=inside,
                metadata={"frequency_hz": f, "from_deg": a},
            )
            runs.append((f, a, name))
            masked = u.copy()
            masked[inside] = np.nan
            expected.append(split_complex("u_total", masked))
    pvd = write_sweep_pvd(tmp_path / "near.pvd", runs)

    t = np.linspace(0, 2 * np.pi, 12, endpoint=False)
    ring = np.column_stack([np.cos(t), np.sin(t)])
    boundary = write_boundary_vtu(
        tmp_path / "surface.vtu",
        0.3 * ring,
        ring,
        np.zeros(12, dtype=int),
        np.zeros(12, dtype=int),
        {"u": np.exp(1j * t)},
    )

    script = tmp_path / "check.py"
    script.write_text(SCRIPT)
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    env.pop("DISPLAY", None)
    done = subprocess.run(
        [PVPYTHON, "--force-offscreen-rendering", str(script), str(pvd), str(boundary)],
        capture_output=True,
        text=True,
        timeout=120,
        env=env,
        cwd=tmp_path,
    )
    lines = [ln for ln in done.stdout.splitlines() if ln.startswith("RESULT ")]
    assert done.returncode == 0 and lines, f"pvpython failed:\n{done.stdout}\n{done.stderr}"
    result = json.loads(lines[-1][len("RESULT ") :])

    n_steps = len(FREQUENCIES_HZ) * len(INCIDENCES_DEG)
    assert result["times"] == [float(i) for i in range(n_steps)]  # one step per (f, phi), exact
    assert result["info_points"] == x.size * y.size  # ParaView data information
    steps_table = read_csv(tmp_path / "near_steps.csv")
    for i, step in enumerate(result["steps"]):
        assert step["class"] == "vtkUnstructuredGrid"
        assert step["points"] == x.size * y.size  # number of points, exact
        assert step["cells"] == (x.size - 1) * (y.size - 1)  # quads, exact
        names = set(step["arrays"])
        assert names == set(expected[i]) | {"inside"}  # array names as written
        for key, values in expected[i].items():
            low, high = step["arrays"][key][1:]
            # ParaView's GetRange skips NaN; values written as float64, read
            # by VTK: atol 1e-12 (rounding of the range computation only).
            assert low == pytest.approx(np.nanmin(values), abs=1e-12), (i, key)
            assert high == pytest.approx(np.nanmax(values), abs=1e-12), (i, key)
        assert step["arrays"]["inside"][1:] == [0.0, 1.0]  # mask present in ParaView
        # FieldData matches the companion table: steps map back to the sweep.
        assert step["metadata"]["frequency_hz"] == steps_table["frequency_hz"][i]  # exact
        assert step["metadata"]["from_deg"] == steps_table["from_deg"][i]  # exact
    bnd = result["boundary"]
    assert bnd["points"] == 12 and bnd["cells"] == 12  # closed loop of 12 segments
    assert bnd["cell_type"] == 3  # VTK_LINE (vtkCellType.h)
    assert bnd["normal_components"] == 3  # normal as a 3-vector
    assert {"body_id", "contour_id", "normal", "u_re", "u_db"} <= set(bnd["arrays"])
